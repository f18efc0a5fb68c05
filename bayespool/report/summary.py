"""The run summary, the assay model and the decoder's diagnostics: what went in and how it was read."""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, facts, frame_table, kv_table, section, value_html
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


def run_section(run, notes=(), fitted_prevalence: Mapping | None = None) -> str:
    """Specimens, pools, readouts, input files and notes. ``fitted_prevalence`` (estimate, lower,
    upper of a calibration from these runs) replaces the prior line, which would otherwise show
    the default prevalence the fit did not use."""
    read = run.pool_read
    in_read = np.zeros(run.n_samples, bool)
    if run.n_memberships:
        owner = np.repeat(read, run.pool_size)
        in_read[run.pool_members[owner]] = True
    replicated = int(np.sum(run.pool_reads > 1))
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
        ("Prior", _prior(run.prior)) if fitted_prevalence is None else
        ("Prevalence", text(f"{fmt.number(fitted_prevalence['estimate'])} fitted by the "
                            f"calibration (interval {fmt.number(fitted_prevalence['lower'])} to "
                            f"{fmt.number(fitted_prevalence['upper'])}); the calibration fits one "
                            "prevalence for every specimen")),
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


FIT_LABELS = {"method": "calibrated from", "bayespool": "bayespool version",
              "readouts_used": "readouts used", "parameters": "fitted parameters", "aic": "AIC",
              "level": "confidence level", "identified": "identified by the data",
              "rows_skipped": "rows skipped"}
FIT_METHODS = {"validation": "validation data (known truth)",
               "runs": "past runs (latent truth)"}


def fit_html(details: Mapping) -> str:
    """An assay file's ``[fit]`` table for people: the estimates as a table, warnings as a list,
    the rest as labelled values."""
    details = dict(details)
    parts = []
    if "method" in details:
        details["method"] = FIT_METHODS.get(details["method"], details["method"])
    details = {FIT_LABELS.get(k, k): v for k, v in details.items()}
    estimates = details.pop("estimates", None)
    warnings = details.pop("warnings", None)
    comparison = details.pop("comparison", None)
    uncertainty = details.pop("uncertainty", None)
    if details:
        parts.append(kv_table(details))
    if isinstance(uncertainty, Mapping) and uncertainty:
        parts.append(el("h4", "Uncertainty of the fit (what --assay-uncertainty averages over)") +
                     kv_table(_uncertainty_facts(uncertainty)))
    if isinstance(estimates, Mapping) and estimates:
        frame = pd.DataFrame([{"parameter": k, **(v if isinstance(v, Mapping) else {"estimate": v})}
                              for k, v in estimates.items()])
        parts.append(el("h4", "Estimates") + frame_table(frame, class_="data nested"))
    if comparison:
        parts.append(el("h4", "Families compared") + value_html(comparison))
    if warnings:
        parts.append(el("h4", "Warnings of the fit") + el(
            "ul", "".join(el("li", text(w)) for w in warnings), class_="plain"))
    return "".join(parts)


def _uncertainty_facts(uncertainty: Mapping) -> dict:
    """The ``[fit.uncertainty]`` table in short: its parameters, not its hundreds of draws."""
    out = {}
    for key, value in uncertainty.items():
        if key == "sensitivity_draws":
            out[key] = f"{len(value)} draws"
        elif isinstance(value, (list, tuple)):
            out[key] = ", ".join(str(v) for v in value)
        else:
            out[key] = value
    return out


FIT_TABLES = ("estimates", "warnings", "comparison", "goodness_of_fit")


def assay_section(assay, run=None, observed=None, shown_elsewhere=()) -> str:
    """The assay model in words and numbers, with its sensitivity curve. How it was fitted (the
    assay file's ``[fit]`` table) is folded here, less what the calibration section of the same
    report already shows (``shown_elsewhere``: keys of its summary), so nothing is shown twice."""
    s = assay.sensitivity
    params = {k: v for k, v in s.to_dict().items() if k not in ("model", "table")}
    items = [("Model", text(assay.describe())), ("Specificity", text(fmt.number(assay.specificity))),
             ("Sensitivity family", text(s.model))]
    if params:
        items.append(("Parameters", kv_table(params)))
    body = facts(items)
    hidden = set(shown_elsewhere) | (set(FIT_TABLES) if shown_elsewhere else set())
    details = {k: v for k, v in (assay.details or {}).items() if k not in hidden}
    if details:
        more = " (the estimates are in the calibration section)" if shown_elsewhere else ""
        body += el("details", el("summary", "How this assay was fitted" + more) +
                   fit_html(details), class_="fit")
    sizes = None
    if run is not None:
        read = run.pool_read
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


DECODER_WORDS = {"exact": "exact enumeration of every joint state",
                 "bp": "belief propagation (approximate on loopy groups)",
                 "gibbs": "Gibbs sampler (Monte Carlo)"}


def decoder_words(method: str) -> str:
    return " and ".join(DECODER_WORDS.get(m, m) for m in str(method).split("+"))


def decoder_section(posterior, run=None) -> str:
    """Call counts, thresholds, whether the decoder converged and its warnings; the diagnostics'
    jargon (components, sweeps, residuals) is folded into a technical section."""
    c = posterior.counts()
    tiles = el("div", "".join(
        el("div", el("span", text(fmt.number(c[k])), class_="n") + el("span", k, class_="k"),
           class_=f"tile tile-{k}") for k in ("positive", "inconclusive", "negative")),
        class_="tiles", id="call-counts")
    methods = pd.Series(posterior.sample_method).value_counts()
    items = [("Decoder", text(decoder_words(posterior.method)) + (
        " " + el("span", text("(" + ", ".join(f"{decoder_words(m)}: {n} specimens"
                                              for m, n in methods.items()) + ")"),
                 class_="muted") if len(methods) > 1 else "")),
             ("Calls", text(f"positive when P > {posterior.positive_above:g}, negative when "
                            f"P < {posterior.negative_below:g}, otherwise inconclusive"))]
    diag = {k: v for k, v in (posterior.diagnostics or {}).items() if k not in SKIP_DIAGNOSTICS}
    body = tiles + convergence_banner(diag) + facts(items)
    shown = set(run.notes or []) if run is not None else set()  # already in the run summary
    warnings = [w for w in posterior.warnings if w not in shown]
    if warnings:
        body += el("div", el("p", "Warnings from the decoder:") + el(
            "ul", "".join(el("li", text(w)) for w in warnings)), class_="warn")
    body += technical_details(posterior, diag)
    return section("decoder", "Decoder and convergence", body)


def technical_details(posterior, diag: Mapping) -> str:
    """The decoder's own figures for a statistician, folded away: evidence, Monte Carlo error,
    draws and every diagnostic it reported."""
    items = []
    if posterior.log_evidence is not None:
        items.append(("Log evidence", text(f"{posterior.log_evidence:.4f} (natural log of the "
                                           "probability of the readouts under the model)")))
    if posterior.mcse is not None and len(posterior.mcse):
        items.append(("Monte Carlo error", text(f"largest standard error of a probability "
                                                f"{fmt.number(float(np.nanmax(posterior.mcse)))}")))
    if posterior.draws is not None:
        items.append(("Posterior draws", text(f"{fmt.number(len(posterior.draws))} kept")))
    inner = facts(items) + (el("h3", "Diagnostics") + kv_table(diag) if diag else "")
    if not inner.strip():
        return ""
    return el("details", el("summary", "Technical details: how the decoder ran (groups of linked "
                                       "specimens, sweeps, residuals, sampler figures)") + inner,
              class_="technical", id="technical-decoder")


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

