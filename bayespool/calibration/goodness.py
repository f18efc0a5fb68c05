"""Observed against fitted detection rates per (pool size, positives) cell, and a goodness-of-fit test.

With cells j of n_j readouts, x_j positive, and fitted rates p_j, the deviance
G^2 = 2 sum_j [x_j log(x_j / n_j p_j) + (n_j - x_j) log((n_j - x_j) / (n_j (1 - p_j)))] and Pearson's
X^2 = sum_j (x_j - n_j p_j)^2 / (n_j p_j (1 - p_j)) are compared with chi-square on (cells - fitted
parameters) degrees of freedom (McCullagh & Nelder 1989, Generalized Linear Models, 2nd ed., sec.
4.4). When many expected counts are small that reference is rough, so a parametric bootstrap of
the deviance (refitting every simulated set) is offered.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.special import xlogy
from scipy.stats import chi2

from ..progress import progress_bar
from .intervals import clopper_pearson
from .validation import Cells


def deviance_terms(trials, detected, fitted) -> np.ndarray:
    """Per-cell deviance contributions (0 where the fit matches exactly)."""
    n, x, p = (np.asarray(a, dtype=float) for a in (trials, detected, fitted))
    with np.errstate(divide="ignore", invalid="ignore"):
        obs = np.where(n > 0, x / n, 0.0)
        term = 2.0 * (xlogy(x, obs) - xlogy(x, p) + xlogy(n - x, 1 - obs) - xlogy(n - x, 1 - p))
    return np.maximum(term, 0.0)


def cell_frame(cells: Cells, fitted: np.ndarray, level: float = 0.95) -> pd.DataFrame:
    """One row per cell: readouts, positive readouts, observed rate with its Clopper-Pearson
    interval, fitted rate, expected positives and the residuals."""
    n, x = cells.trials, cells.detected
    lower, upper = clopper_pearson(x, n, level)
    p = np.asarray(fitted, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        pearson = np.where(p * (1 - p) > 0, (x - n * p) / np.sqrt(n * p * (1 - p)), 0.0)
        observed = x / n
    dev = deviance_terms(n, x, p)
    frame = pd.DataFrame({
        "pool_size": cells.k.astype(int), "positives": cells.d.astype(int),
        "dilution": np.where(cells.d > 0, cells.k / np.maximum(cells.d, 1), np.nan),
        "readouts": n.astype(int), "positive_readouts": x.astype(int),
        "observed_rate": observed, "observed_lower": lower, "observed_upper": upper,
        "fitted_rate": p, "expected_positive": n * p,
        "pearson_residual": pearson,
        "deviance_residual": np.sign(x - n * p) * np.sqrt(dev)})
    frame.insert(2, "kind", np.where(cells.d > 0, "sensitivity", "false positive"))
    return frame


def goodness_of_fit(cells: Cells, fitted, n_params: int) -> dict:
    """Deviance and Pearson statistics with chi-square p-values (None when saturated)."""
    n, x, p = cells.trials, cells.detected, np.asarray(fitted, dtype=float)
    dev = float(deviance_terms(n, x, p).sum())
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(p * (1 - p) > 0, (x - n * p) ** 2 / (n * p * (1 - p)),
                         np.where(x == n * p, 0.0, np.inf))
    pearson = float(terms.sum())
    df = int(len(cells) - n_params)
    expected = np.minimum(n * p, n * (1 - p))
    out = {"cells": int(len(cells)), "parameters": int(n_params), "df": df,
           "deviance": dev, "pearson": pearson,
           "deviance_p_value": float(chi2.sf(dev, df)) if df > 0 else None,
           "pearson_p_value": float(chi2.sf(pearson, df)) if df > 0 else None,
           "small_expected_cells": int((expected < 5).sum())}
    return out


def bootstrap_p_value(cells: Cells, fitted, observed_deviance: float, refit, draws: int,
                      rng) -> float:
    """Parametric bootstrap p-value of the deviance: simulate every cell from the fitted rates,
    refit (``refit(detected) -> fitted rates``) and count simulated deviances >= the observed."""
    p = np.asarray(fitted, dtype=float)
    n = cells.trials.astype(np.int64)
    exceed = 0
    bar = progress_bar(None, int(draws), desc="bootstrap", unit="draw")
    try:
        for _ in range(int(draws)):
            x = rng.binomial(n, p).astype(float)
            dev = deviance_terms(n, x, refit(x)).sum()
            exceed += dev >= observed_deviance - 1e-9
            bar.update(1)
    finally:
        bar.close()
    return float((1 + exceed) / (draws + 1))
