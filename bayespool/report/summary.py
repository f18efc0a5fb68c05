"""The run summary, the assay model and the decoder's diagnostics: what went in and how it was read."""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, facts, frame_table, kv_table, section
from .plots import covered, sensitivity_curve

CONVERGENCE_KEYS = ("converged", "convergence")
SKIP_DIAGNOSTICS = ("ambiguity_groups",)


def _sizes(sizes: np.ndarray) -> str:
    if not len(sizes):
        return "none"
    values, counts = np.unique(sizes, return_counts=True)
    order = np.argsort(-counts, kind="stable")
    shown = [f"{counts[j]} of size {values[j]}" for j in order[:6]]
    if len(order) > 6:
        shown.append(f"{len(order) - 6} more sizes (largest {values.max()})")
    return text(", ".join(shown))


def _prior(prior: np.ndarray) -> str:
    if not len(prior):
        return "none"
    lo, hi = float(prior.min()), float(prior.max())
    if lo == hi:
        return text(f"{fmt.number(lo)} for every specimen")
    return text(f"from {fmt.number(lo)} to {fmt.number(hi)} (median "
                f"{fmt.number(float(np.median(prior)))})")


def run_section(run, notes=()) -> str:
    """Specimens, pools, readouts, input files and notes."""
    read = (run.n_positive + run.n_negative) > 0
    in_read = np.zeros(run.n_samples, bool)
    if run.n_memberships:
        owner = np.repeat(read, run.pool_size)
        in_read[run.pool_members[owner]] = True
    replicated = int(np.sum((run.n_positive + run.n_negative) > 1))
    items = [
        ("Specimens", text(fmt.number(run.n_samples)) +
         (f' <span class="muted">({fmt.number(int((~in_read).sum()))} in no pool with a readout: '
          'their probability is their prior)</span>' if (~in_read).any() else "")),
        ("Pools", text(f"{fmt.number(run.n_pools)} ({fmt.number(int(read.sum()))} with a readout"
                       f", {fmt.number(int((~read).sum()))} without)")),
        ("Pool sizes", _sizes(run.pool_size[read] if read.any() else run.pool_size)),
        ("Memberships", text(fmt.number(run.n_memberships))),
        ("Readouts", text(f"{fmt.number(run.n_readouts)}: {fmt.number(int(run.n_positive.sum()))}"
                          f" positive, {fmt.number(int(run.n_negative.sum()))} negative; "
                          f"{fmt.number(int(np.sum(run.n_positive > 0)))} pool(s) with a positive "
                          f"readout; {fmt.number(replicated)} pool(s) read more than once")),
        ("Prior", _prior(run.prior)),
    ]
    ct = run.readout_ct
    if ct is not None and len(ct) and np.isfinite(ct["ct"]).any():
        v = ct["ct"].to_numpy(float)
        v = v[np.isfinite(v)]
        items.append(("Ct values", text(f"{len(v)} readouts with a Ct, from {v.min():.1f} to "
                                        f"{v.max():.1f} (median {np.median(v):.1f})")))
    files = {k: v for k, v in (run.sources or {}).items() if v}
    if files:
        items.append(("Input files", el("ul", "".join(
            el("li", text(fmt.label(k)) + ": " + el("code", text(v))) for k, v in files.items()),
            class_="plain")))
    all_notes = list(notes) + list(run.notes or [])
    if all_notes:
        items.append(("Notes", el("ul", "".join(el("li", text(n)) for n in all_notes),
                                  class_="plain")))
    return section("summary", "Run summary", facts(items) + pools_table(run))


def pools_table(run) -> str:
    """Every pool with its size, readouts, Ct values and members, folded away by default."""
    if run.n_pools == 0:
        return ""
    ct_text = [""] * run.n_pools
    ct = run.readout_ct
    if ct is not None and len(ct):
        for t, group in ct.groupby("pool")["ct"]:
            vals = [f"{v:.1f}" for v in group if np.isfinite(v)]
            ct_text[int(t)] = ", ".join(vals)
    members = [", ".join(str(run.sample_ids[i]) for i in run.members(t)) for t in range(run.n_pools)]
    frame = pd.DataFrame({"pool": run.pool_ids, "size": run.pool_size,
                          "positive_readouts": run.n_positive.astype(np.int64),
                          "negative_readouts": run.n_negative.astype(np.int64)})
    if any(ct_text):
        frame["ct"] = ct_text
    frame["members"] = members
    table = frame_table(frame, class_="data pools")
    return el("details", el("summary", f"All {fmt.number(run.n_pools)} pools with their readouts "
                            "and members") + el("div", table, class_="scroll"), class_="pools")


def assay_section(assay, run=None, observed=None) -> str:
    """The assay model in words and numbers, with its sensitivity curve."""
    s = assay.sensitivity
    params = {k: v for k, v in s.to_dict().items() if k not in ("model", "table")}
    items = [("Model", text(assay.describe())), ("Specificity", text(fmt.number(assay.specificity))),
             ("Sensitivity family", text(s.model))]
    if params:
        items.append(("Parameters", kv_table(params)))
    if assay.details:
        items.append(("Fit", kv_table(assay.details)))
    body = facts(items)
    sizes = None
    if run is not None:
        read = (run.n_positive + run.n_negative) > 0
        sizes = np.unique(run.pool_size[read]) if read.any() else None
    body += el("figure", sensitivity_curve(assay, sizes, observed) + el(
        "figcaption", "Probability that a pool reads positive against its dilution factor k/d (pool "
        "size k, d positive members). The dashed line is the chance that a pool with no positive "
        "member reads positive."), class_="figure")
    if s.model == "table":
        entries = pd.DataFrame(list(s.entries), columns=["pool_size", "positives", "sensitivity"])
        entries.insert(2, "dilution_k_over_d", entries["pool_size"] / entries["positives"])
        body += el("h3", "Sensitivity table") + frame_table(entries)
    if sizes is not None and len(sizes):
        ks = sizes[covered(s, sizes)]
        if len(ks):
            lone = pd.DataFrame({"pool_size": ks, "sensitivity_one_positive": s(ks, np.ones_like(ks))})
            body += el("h3", "This run's pool sizes") + el(
                "p", "Sensitivity for a pool holding a single positive specimen:", class_="muted") \
                + frame_table(lone)
    return section("assay", "Assay model", body)


def decoder_section(posterior, run=None) -> str:
    """Decoder, thresholds, call counts, convergence and every diagnostic it reported."""
    c = posterior.counts()
    tiles = el("div", "".join(
        el("div", el("span", text(fmt.number(c[k])), class_="n") + el("span", k, class_="k"),
           class_=f"tile tile-{k}") for k in ("positive", "inconclusive", "negative")),
        class_="tiles", id="call-counts")
    methods = pd.Series(posterior.sample_method).value_counts()
    items = [("Decoder", text(posterior.method) + (
        " " + el("span", text("(" + ", ".join(f"{m}: {n}" for m, n in methods.items()) + ")"),
                 class_="muted") if len(methods) > 1 else "")),
             ("Calls", text(f"positive when P > {posterior.positive_above:g}, negative when "
                            f"P < {posterior.negative_below:g}, otherwise inconclusive"))]
    if posterior.log_evidence is not None:
        items.append(("Log evidence", text(f"{posterior.log_evidence:.4f} (natural log of the "
                                           "probability of the readouts under the model)")))
    if posterior.mcse is not None and len(posterior.mcse):
        items.append(("Monte Carlo error", text(f"largest standard error of a probability "
                                                f"{fmt.number(float(np.nanmax(posterior.mcse)))}")))
    if posterior.draws is not None:
        items.append(("Posterior draws", text(f"{fmt.number(len(posterior.draws))} kept")))
    diag = {k: v for k, v in (posterior.diagnostics or {}).items() if k not in SKIP_DIAGNOSTICS}
    body = tiles + convergence_banner(diag) + facts(items)
    if diag:
        body += el("h3", "Diagnostics") + kv_table(diag)
    shown = set(run.notes or []) if run is not None else set()  # already in the run summary
    warnings = [w for w in posterior.warnings if w not in shown]
    if warnings:
        body += el("div", el("p", "Warnings from the decoder:") + el(
            "ul", "".join(el("li", text(w)) for w in warnings)), class_="warn")
    return section("decoder", "Decoder and convergence", body)


def convergence_banner(diag: Mapping) -> str:
    """A clear line when the decoder says whether it converged."""
    for key in CONVERGENCE_KEYS:
        if key in diag and isinstance(diag[key], (bool, np.bool_)):
            if diag[key]:
                return el("p", "The decoder reports that it converged.", class_="ok",
                          id="convergence")
            return el("p", "The decoder reports that it did <b>not</b> converge: treat the "
                      "probabilities below as approximate and do not act on them without "
                      "further tests or another decoder.", class_="warn", id="convergence")
    return ""

