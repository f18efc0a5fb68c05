"""Ct evidence: the pools' cycle thresholds, each specimen's estimated individual Ct, the
sensitivity the load model implies, and a Ct calibration's observed against fitted pool Cts.

Shown only for a ``[ct]`` assay (:mod:`bayespool.ct`). A pool of k whose only positive member has
individual Ct c reads about c + s log2 k (s cycles per doubling: a 1:k dilution at 100 %
efficiency raises the Ct by log2 k cycles, common practice), so each amplified pool's Ct minus
s log2 k is the individual Ct that pool would imply if the specimen were its only positive; the
figure puts those beside the decoder's posterior mean and 95 % interval of the specimen's Ct.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, frame_table, section
from .plots import LINE, MARK, _hex
from .svg import drawing, to_svg

POOLS_SHOWN = 400       # amplified pools listed in the table (most informative first)
SPECIMENS_DRAWN = 40    # specimens in the Ct figure, most probable first
POSITIVES = (1, 2, 3, 4)


def _ct_lists(run) -> dict:
    """Pool index -> list of its Ct readouts (finite values only)."""
    frame = run.readout_ct
    out: dict = {}
    if frame is None or not len(frame):
        return out
    for t, v in zip(frame["pool"].to_numpy(), frame["ct"].to_numpy(float)):
        if np.isfinite(v):
            out.setdefault(int(t), []).append(float(v))
    return out


def _posterior_cts(posterior):
    cols = getattr(posterior, "columns", {}) or {}
    if "ct_mean" not in cols:
        return None
    return (np.asarray(cols["ct_mean"], float), np.asarray(cols["ct_low"], float),
            np.asarray(cols["ct_high"], float))


def pool_frame(run, assay, posterior, cts: dict) -> pd.DataFrame:
    """Every pool with a Ct readout or a positive readout: its Cts, the individual Ct they imply
    for a lone positive, and its members most probable first with their estimated Cts."""
    model = assay.ct
    prob = np.asarray(posterior.probability, float) if posterior is not None else None
    est = _posterior_cts(posterior) if posterior is not None else None
    rows = []
    for t in np.flatnonzero((run.n_positive > 0) | np.isin(np.arange(run.n_pools), list(cts))):
        t = int(t)
        values = cts.get(t, [])
        k = int(run.pool_size[t])
        members = [int(m) for m in run.members(t)]
        if prob is not None:
            members.sort(key=lambda m: -prob[m])
        shown = []
        for m in members[:6]:
            part = str(run.sample_ids[m])
            if prob is not None:
                part += f" {fmt.prob_short(prob[m])}"
                if est is not None and np.isfinite(est[0][m]):
                    part += f" (Ct {est[0][m]:.1f})"
            shown.append(part)
        if len(members) > 6:
            shown.append(f"and {len(members) - 6} more")
        mean = float(np.mean(values)) if values else np.nan
        rows.append({"pool": str(run.pool_ids[t]), "size": k,
                     "positive_readouts": int(run.n_positive[t]),
                     "negative_readouts": int(run.n_negative[t]),
                     "ct_readouts": ", ".join(f"{v:.1f}" for v in values),
                     "mean_ct": mean,
                     "lone_positive_ct": mean - float(model.pool_shift(k)) if values else np.nan,
                     "members": ", ".join(shown)})
    frame = pd.DataFrame(rows, columns=["pool", "size", "positive_readouts", "negative_readouts",
                                        "ct_readouts", "mean_ct", "lone_positive_ct", "members"])
    return frame.sort_values(["mean_ct", "pool"], na_position="last", kind="stable")


def specimen_frame(run, posterior, cts: dict) -> pd.DataFrame:
    """Specimens with an estimated Ct, most probable first: the estimate with its interval and
    the Cts of their pools."""
    est = _posterior_cts(posterior)
    if est is None:
        return pd.DataFrame()
    mean, low, high = est
    keep = np.flatnonzero(np.isfinite(mean))
    prob = np.asarray(posterior.probability, float)
    keep = keep[np.lexsort((keep, -prob[keep]))]
    calls = posterior.calls()
    pools = []
    for i in keep:
        parts = []
        for t in run.pools_of(int(i)).tolist():
            if t in cts:
                parts.append(f"{run.pool_ids[t]} (k={int(run.pool_size[t])}): "
                             + ", ".join(f"{v:.1f}" for v in cts[t]))
        pools.append("; ".join(parts))
    return pd.DataFrame({"sample": [str(posterior.sample_ids[i]) for i in keep],
                         "probability": prob[keep], "call": [calls[i] for i in keep],
                         "ct_mean": mean[keep], "ct_low": low[keep], "ct_high": high[keep],
                         "pools_with_ct": pools})


def specimen_figure(run, assay, posterior, cts: dict) -> str:
    """Each specimen's posterior Ct (mean and 95 % interval, given that it is positive) beside
    the individual Ct each of its amplified pools implies for a lone positive."""
    est = _posterior_cts(posterior)
    if est is None:
        return ""
    mean, low, high = est
    prob = np.asarray(posterior.probability, float)
    keep = np.flatnonzero(np.isfinite(mean))
    if not len(keep):
        return ""
    keep = keep[np.lexsort((keep, -prob[keep]))][:SPECIMENS_DRAWN]
    keep = keep[np.argsort(mean[keep], kind="stable")]
    model = assay.ct
    y = np.arange(len(keep))
    with drawing("ct-specimens", 6.6, 1.2 + 0.24 * len(keep)) as fig:
        ax = fig.add_subplot()
        ax.errorbar(mean[keep], y, xerr=[mean[keep] - low[keep], high[keep] - mean[keep]],
                    fmt="o", color=LINE, ms=4, capsize=2, lw=1.2,
                    label="posterior mean and 95% interval (if positive)")
        px, py = [], []
        for row, i in enumerate(keep):
            for t in run.pools_of(int(i)).tolist():
                for v in cts.get(t, []):
                    px.append(v - float(model.pool_shift(run.pool_size[t])))
                    py.append(row)
        if px:
            ax.plot(px, py, "x", color=MARK, ms=5, mew=1.3,
                    label="pool Ct \u2212 s log2 k (as if the only positive)")
        ax.axvline(model.cutoff, color=_hex(0.5), lw=0.8, ls=":")
        ax.set_yticks(y, [str(posterior.sample_ids[i]) for i in keep], fontsize=7.5)
        ax.set_ylim(-0.8, len(keep) - 0.2)
        ax.invert_xaxis()  # strong (low Ct) to the right, as loads read
        ax.set_xlabel("individual Ct (cycles; lower = more target)")
        fig.legend(loc="outside lower center", ncol=2, fontsize=7.5, frameon=False)
        return to_svg(fig, "ct-specimens", "Estimated individual Ct of each specimen with its "
                      "interval and the Cts its pools imply")


def sensitivity_table(assay, sizes) -> pd.DataFrame:
    """The implied Se(k, d) for the given pool sizes, d = 1..4 (where d <= k)."""
    rows = []
    for k in sizes:
        row = {"pool_size": int(k)}
        for d in POSITIVES:
            row[f"se_{d}_positive" + ("s" if d > 1 else "")] = (
                float(assay.sensitivity(np.array([k]), np.array([d]))[0]) if d <= k else np.nan)
        rows.append(row)
    return pd.DataFrame(rows)


def sensitivity_figure(assay, run_sizes) -> str:
    """Se(k, d) implied by the load model against the pool size k, one line per d."""
    top = max(64, int(np.max(run_sizes)) * 2 if len(run_sizes) else 64)
    k = np.unique(np.round(np.geomspace(1, top, 60)).astype(np.int64))
    with drawing("ct-sensitivity", 6.6, 3.3) as fig:
        ax = fig.add_subplot()
        ax.set_xscale("log", base=2)
        for j, d in enumerate(POSITIVES):
            kk = k[k >= d]
            ax.plot(kk, assay.sensitivity(kk, np.full(len(kk), d)), "-",
                    color=_hex(0.95 - 0.22 * j), lw=2 if d == 1 else 1.2,
                    label=f"d = {d} positive{'s' if d > 1 else ''}")
        if len(run_sizes):
            ks = np.asarray(run_sizes, dtype=np.int64)
            ax.plot(ks, assay.sensitivity(ks, np.ones_like(ks)), "D", color=MARK, ms=5,
                    mfc="white", mew=1.5, label="this run's pool sizes, d = 1", zorder=5)
        ax.axhline(1.0 - assay.specificity, color="#6b6b6b", lw=1, ls="--",
                   label=f"1 \u2212 Sp = {1.0 - assay.specificity:.3g}")
        ax.set_xlim(0.9, top * 1.1)
        ax.set_ylim(-0.02, 1.04)
        ax.set_xlabel("pool size k")
        ax.set_ylabel("P(a readout amplifies)")
        ax.legend(loc="lower left", fontsize=8, frameon=False)
        return to_svg(fig, "ct-sensitivity", "Sensitivity implied by the Ct model against pool "
                      "size, one line per number of positive members")


def ct_section(run, assay, posterior) -> str:
    """The Ct evidence of a run decoded with a ``[ct]`` assay (empty otherwise)."""
    if assay is None or getattr(assay, "ct", None) is None:
        return ""
    model = assay.ct
    body = el("p", text(model.describe()), class_="muted")
    sizes = np.array([], dtype=np.int64)
    if run is not None:
        read = (run.n_positive + run.n_negative) > 0
        sizes = np.unique(run.pool_size[read]) if read.any() else sizes
        cts = _ct_lists(run)
        pools = pool_frame(run, assay, posterior, cts)
        if len(pools):
            more = ""
            if len(pools) > POOLS_SHOWN:
                more = el("p", text(f"{fmt.number(len(pools))} pools amplified; the "
                                    f"{POOLS_SHOWN} with the lowest Ct are listed."),
                          class_="muted")
                pools = pools.head(POOLS_SHOWN)
            body += el("h3", "Pools that amplified") + el(
                "p", text("Each pool with a positive readout: its Ct readouts, their mean, and "
                          f"the individual Ct a lone positive member would have (mean Ct \u2212 "
                          f"{model.cycles_per_doubling:g} \u00d7 log2 k). Members are listed most "
                          "probable first with their estimated Ct."), class_="muted") + more + \
                el("div", frame_table(pools, class_="data ct-pools"), class_="scroll")
        if posterior is not None:
            specimens = specimen_frame(run, posterior, cts)
            if len(specimens):
                body += el("h3", "Estimated individual Ct of each specimen") + el(
                    "p", text("For every specimen above the negative threshold: the posterior "
                              "mean and 95% interval of the Ct it would read alone, given that it "
                              "is positive. " + str((posterior.diagnostics or {}).get("ct", {})
                                                    .get("ct_interval", ""))), class_="muted")
                body += el("figure", specimen_figure(run, assay, posterior, cts) + el(
                    "figcaption", f"Specimens with an estimated Ct (at most {SPECIMENS_DRAWN}, "
                    "most probable first), ordered by it. Crosses: each amplified pool's Ct "
                    "minus the dilution shift, the specimen's Ct if it were the pool's only "
                    "positive; a cross far from the interval points at another positive in "
                    "that pool."), class_="figure")
                body += el("div", frame_table(specimens, class_="data ct-specimens"),
                           class_="scroll")
    table = sensitivity_table(assay, sorted(set(int(k) for k in sizes) | {1}))
    body += el("h3", "Sensitivity implied by the Ct model") + el("figure", sensitivity_figure(
        assay, sizes) + el("figcaption", "P(a readout amplifies) for a pool of k with d positive "
                           "members, averaged over the members' individual Cts (the binary "
                           "sensitivity the load model implies; design formulas, binary "
                           "simulation and the planner use it)."), class_="figure")
    body += frame_table(table, class_="data ct-se")
    return section("ct", "Ct evidence", body, "How the cycle thresholds were read: a pool's Ct "
                   "rises by about log2 k cycles per k-fold dilution, so the Cts point at which "
                   "members carry the target and how much.")


def calibration_figure(points: pd.DataFrame, model) -> str:
    """Observed pool Ct against the fitted individual Ct + s log2 k, with the line y = x, and the
    dilution shift against log2 k with the fitted slope s."""
    amp = np.isfinite(points["ct"].to_numpy(float))
    k = points["pool_size"].to_numpy(float)
    c = points["individual_ct"].to_numpy(float)
    y = points["ct"].to_numpy(float)
    s = model.cycles_per_doubling
    fitted = c + s * np.log2(k)
    with drawing("ct-calibration", 6.8, 3.3) as fig:
        ax, bx = fig.subplots(1, 2)
        ax.plot(fitted[amp], y[amp], "o", color=LINE, ms=3.5, alpha=0.7, label="amplified readouts")
        lo = float(np.nanmin(np.concatenate([fitted, y[amp]]))) - 1
        hi = float(np.nanmax(np.concatenate([fitted, y[amp]]))) + 1
        ax.plot([lo, hi], [lo, hi], "-", color=MARK, lw=1.5, label="fitted: y = x")
        if (~amp).any():
            ax.plot(fitted[~amp], np.full((~amp).sum(), model.cutoff), "v", color=_hex(0.5),
                    ms=4, label="no amplification (at the cutoff)")
        ax.axhline(model.cutoff, color=_hex(0.5), lw=0.8, ls=":")
        ax.set_xlabel("individual Ct + s log2 k (fitted)")
        ax.set_ylabel("observed pool Ct")
        ax.legend(loc="upper left", fontsize=7, frameon=False)
        lk = np.log2(k)
        bx.plot(lk[amp], (y - c)[amp], "o", color=LINE, ms=3.5, alpha=0.7)
        grid = np.linspace(0, max(float(lk.max()), 1.0), 50)
        bx.plot(grid, s * grid, "-", color=MARK, lw=1.5, label=f"fitted s = {s:.3f}")
        bx.plot(grid, grid, ":", color=_hex(0.5), lw=1, label="100% efficiency (s = 1)")
        bx.set_xlabel("log2 pool size")
        bx.set_ylabel("pool Ct \u2212 individual Ct")
        bx.legend(loc="upper left", fontsize=7, frameon=False)
        return to_svg(fig, "ct-calibration", "Observed pool Ct against the fitted individual Ct "
                      "plus the dilution shift, and the shift against pool size")


def ct_calibration_section(calibration) -> str:
    """A Ct calibration's observed against fitted pool Cts (empty for other fits)."""
    points = getattr(calibration, "points", None)
    assay = getattr(calibration, "assay", None)
    if points is None or not len(points) or getattr(assay, "ct", None) is None:
        return ""
    model = assay.ct
    amp = np.isfinite(points["ct"].to_numpy(float))
    resid = (points["ct"] - points["individual_ct"]
             - model.cycles_per_doubling * np.log2(points["pool_size"])).to_numpy(float)[amp]
    by_size = points.assign(shift=points["ct"] - points["individual_ct"]).groupby("pool_size")
    table = pd.DataFrame({
        "readouts": by_size.size(),
        "amplified": by_size["ct"].apply(lambda v: int(np.isfinite(v).sum())),
        "mean_shift": by_size["shift"].mean(),
    }).reset_index()
    table["fitted_shift"] = model.cycles_per_doubling * np.log2(table["pool_size"])
    table["log2_k"] = np.log2(table["pool_size"])
    facts_line = (f"{int(amp.sum())} of {len(points)} one-positive readouts amplified; residual "
                  f"sd {np.std(resid, ddof=1) if amp.sum() > 1 else float('nan'):.3f} cycles "
                  f"against the fitted noise sd {model.noise_sd:.3f}.")
    body = el("figure", calibration_figure(points, model) + el(
        "figcaption", "Left: each readout of a pool with one spiked positive, its observed Ct "
        "against the spiked specimen's individual Ct plus s log2 k (s fitted); the line is where "
        "the model puts them. Right: the rise of the Ct over the individual Ct against log2 k "
        "with the fitted slope; at 100% efficiency the slope is 1 (common practice)."),
        class_="figure")
    body += el("p", text(facts_line), class_="muted") + frame_table(table, class_="data ct-fit")
    return section("ct-calibration", "Ct calibration: observed against fitted", body,
                   "How well the fitted dilution law matches the validation readouts with Cts.")
