"""What ``bayespool simulate`` prints: one simulation's characteristics with their Monte Carlo
standard errors beside the closed form, or a study's table."""
from __future__ import annotations

import math

from ..result_protocol import CAUTION

LABELS = {"tests_per_sample": "tests per specimen", "sensitivity": "sensitivity",
          "specificity": "specificity", "ppv": "positive predictive value",
          "npv": "negative predictive value", "rounds": "rounds (turnaround)",
          "draws_per_sample": "draws per specimen"}


def estimate_text(value, se=None, digits=4) -> str:
    """A value to ``digits`` decimals, more when its standard error needs them (2 significant)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    if se is not None and not (isinstance(se, float) and math.isnan(se)):
        if se > 0:
            digits = min(max(digits, 1 - math.floor(math.log10(se))), 8)
        return f"{value:.{digits}f} ± {se:.{digits}f}"
    return f"{value:.{digits}f}"


def _param_text(value) -> str:
    """A protocol parameter for people: ``none`` rather than Python's None."""
    if value is None:
        return "none"
    return f"{value:g}" if isinstance(value, float) else str(value)


def simulation_text(sim) -> str:
    """One protocol at one setting (``str(simulation)``)."""
    params = ", ".join(f"{k.replace('_', ' ')} {_param_text(v)}"
                       for k, v in sim.parameters.items())
    c = sim.characteristics
    prev = f"prevalence {sim.prevalence:g}" if sim.prevalence is not None else "per-specimen priors"
    lines = [f"{sim.scheme}" + (f" ({params})" if params else "") + f", {c.specimens} specimens, "
             f"{prev}, {sim.assay.describe()}",
             f"{c.runs} simulated runs (estimate ± Monte Carlo standard error)"
             + (f"; closed form: {sim.expected['source']}" if sim.expected is not None else "")]
    for row in c.table().itertuples():
        shown = estimate_text(row.estimate, row.mcse)
        line = f"  {LABELS[row.characteristic]:<27} {shown:>20}"
        if sim.expected is not None and row.characteristic in sim.expected:
            decimals = len(shown.split(" ")[0].partition(".")[2]) or 4
            line += f"   closed form {estimate_text(sim.expected[row.characteristic], digits=decimals)}"
        lines.append(line)
    lines.append(f"  most draws from one specimen: {c.max_draws}")
    lines += [f"  note: {note}" for note in sim.notes]
    lines.append("  " + CAUTION)
    return "\n".join(lines)


def _blank(value) -> bool:
    return value is None or (isinstance(value, float) and value != value)


def sweep_text(result) -> str:
    """A study's table, one row per setting (``str(sweep)`` of several simulations)."""
    table = result.table
    first = result.results[0]
    schemes = list(dict.fromkeys(table["scheme"]))
    assays = list(dict.fromkeys(s.assay.describe() for s in result.results))
    lines = [f"{', '.join(schemes)} {'study' if len(schemes) > 1 else 'sweep'}, "
             f"{first.characteristics.specimens} specimens, "
             f"{first.characteristics.runs} runs per setting"
             + (f", {assays[0]}" if len(assays) == 1 else "")]
    keys = [k for k in ("scheme", "prevalence", "assay", "pool_size", "rows", "cols",
                        "negative_below", "positive_above")
            if k in table.columns and (k != "scheme" or len(schemes) > 1)]
    cols = ["tests_per_sample", "sensitivity", "specificity", "ppv", "npv", "rounds"]
    head = [k.replace("_", " ") for k in keys] + ["tests/specimen", "sensitivity",
                                                  "specificity", "PPV", "NPV", "rounds"]
    rows = []
    for r in table.to_dict("records"):
        cells = ["" if _blank(r[k]) else (f"{r[k]:g}" if isinstance(r[k], (int, float))
                                          else str(r[k])) for k in keys]
        cells += [estimate_text(r[c], r[f"{c}_se"], 3) for c in cols]
        rows.append(cells)
    widths = [max(len(h), *(len(row[i]) for row in rows)) for i, h in enumerate(head)]
    lines.append("  ".join(h.rjust(w) for h, w in zip(head, widths)))
    lines += ["  ".join(c.rjust(w) for c, w in zip(row, widths)) for row in rows]
    lines.append("(estimate ± Monte Carlo standard error) " + CAUTION)
    return "\n".join(lines)
