"""The calibration: a fit's summary and its cells, observed against fitted detection per pool size
and number of positives, with exact binomial intervals on the observed rates.

The fit result is read through two things only: ``summary()`` (a dict, shown as it is) and
``cells`` (a DataFrame, every column shown). When the cells name a pool size, a number of positives,
a number of readouts and of positive readouts (under any of the usual names below), the observed
rate gets a 95% Clopper-Pearson interval (Clopper & Pearson 1934, Biometrika 26(4)) and the points
are drawn on the assay's sensitivity curve.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .escape import text
from .markup import el, frame_table, kv_table, section, value_html

POOL_SIZE = ("pool_size", "k", "size")
POSITIVES = ("positives", "d", "positive_members", "n_positive_members")
READOUTS = ("readouts", "n", "n_readouts", "tests", "total", "count", "trials")
DETECTED = ("detected", "positive_readouts", "n_detected", "detections", "hits", "successes",
            "n_positive", "positive")
OBSERVED = ("observed", "observed_rate", "observed_detection", "rate")


def _find(frame: pd.DataFrame, names) -> str | None:
    lower = {str(c).lower(): c for c in frame.columns}
    for n in names:
        if n in lower:
            return lower[n]
    return None


def clopper_pearson(x, n, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Exact binomial interval for x successes in n trials (0 and 1 at the ends)."""
    from scipy.stats import beta
    x = np.asarray(x, dtype=float)
    n = np.asarray(n, dtype=float)
    a = (1 - level) / 2
    with np.errstate(invalid="ignore", divide="ignore"):
        low = np.where(x > 0, beta.ppf(a, x, n - x + 1), 0.0)
        high = np.where(x < n, beta.ppf(1 - a, x + 1, n - x), 1.0)
    return low, high


def observed_points(cells: pd.DataFrame | None) -> tuple[pd.DataFrame | None, pd.DataFrame | None]:
    """(points for the sensitivity plot, the cells with interval columns added), when identifiable."""
    if cells is None or not len(cells):
        return None, cells
    k, d = _find(cells, POOL_SIZE), _find(cells, POSITIVES)
    if k is None or d is None:
        return None, cells
    n, x, obs = _find(cells, READOUTS), _find(cells, DETECTED), _find(cells, OBSERVED)
    kd = pd.to_numeric(cells[k], errors="coerce").to_numpy(float)
    dd = pd.to_numeric(cells[d], errors="coerce").to_numpy(float)
    shown = cells.copy()
    if n is not None and x is not None:
        nn = pd.to_numeric(cells[n], errors="coerce").to_numpy(float)
        xx = pd.to_numeric(cells[x], errors="coerce").to_numpy(float)
        with np.errstate(invalid="ignore", divide="ignore"):
            rate = xx / nn
        low, high = clopper_pearson(xx, nn)
        if obs is None:
            shown["observed_rate"] = rate
        shown["observed_95_low"], shown["observed_95_high"] = low, high
    elif obs is not None:
        rate = pd.to_numeric(cells[obs], errors="coerce").to_numpy(float)
        low = high = rate
    else:
        return None, cells
    ok = (dd >= 1) & np.isfinite(kd) & np.isfinite(rate)
    if not ok.any():
        return None, shown
    points = pd.DataFrame({"dilution": kd[ok] / dd[ok], "rate": rate[ok], "low": low[ok],
                           "high": high[ok]})
    return points, shown


KIND_WORDS = {"runs": "past runs (latent truth)", "validation": "validation data (known truth)"}


def summary_html(summary: dict) -> str:
    """A fit's summary for people: the estimates and the families compared as tables, the
    warnings as a list, the goodness of fit and the rest as labelled values."""
    summary = dict(summary)
    summary.pop("assay", None)  # the assay section shows the fitted model
    params = summary.pop("parameters", {}) or {}
    comparison = summary.pop("comparison", None)
    warnings = summary.pop("warnings", None) or []
    goodness = summary.pop("goodness_of_fit", None)
    if "kind" in summary:
        summary["kind"] = KIND_WORDS.get(summary["kind"], summary["kind"])
    body = kv_table(summary)
    if params and all(isinstance(v, dict) for v in params.values()):
        frame = pd.DataFrame([{"parameter": k, **v} for k, v in params.items()])
        body += el("h4", "Estimates") + frame_table(frame, class_="data params")
    elif params:
        body += el("h4", "Estimates") + kv_table(params)
    if goodness:
        body += el("h4", "Goodness of fit") + kv_table(goodness)
    if comparison:
        body += el("h4", "Sensitivity families compared") + value_html(comparison)
    if warnings:
        body += el("div", el("p", "Warnings of the fit:") + el(
            "ul", "".join(el("li", text(w)) for w in warnings)), class_="warn")
    return body


def calibration_section(calibration, shown_cells: pd.DataFrame | None) -> str:
    summary = calibration.summary() if hasattr(calibration, "summary") else {}
    latent = summary.get("kind") == "runs"
    data = "past runs (pools and individual follow-up tests)" if latent else "validation data"
    body = el("h3", "Fit summary") + summary_html(summary or {})
    if shown_cells is not None and len(shown_cells):
        body += el("h3", "Observed against fitted detection") + el(
            "p", f"One row per pool size and number of positive members in the {data}. "
            "The interval is the exact (Clopper-Pearson) 95% interval of the observed rate; the "
            "points are drawn on the curve in the assay section.", class_="muted") + el(
            "div", frame_table(shown_cells, class_="data cells"), class_="scroll")
    return section("calibration", "Calibration", body,
                   f"How well the fitted assay model matches the {data}.")
