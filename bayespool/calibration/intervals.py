"""Exact binomial intervals for observed rates and for the specificity.

Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated in the
case of the binomial. Biometrika 26(4), 404-413: the interval inverts two one-sided binomial tests,
so its limits are beta quantiles; it covers at least the nominal level for every true rate.
"""
from __future__ import annotations

import numpy as np
from scipy.stats import beta


def clopper_pearson(successes, trials, level: float = 0.95):
    """Lower and upper Clopper-Pearson limits (arrays, vectorised; 0 and 1 at the edges)."""
    x = np.asarray(successes, dtype=float)
    n = np.asarray(trials, dtype=float)
    alpha = 1.0 - level
    with np.errstate(invalid="ignore", divide="ignore"):
        lower = np.where(x > 0, beta.ppf(alpha / 2, x, n - x + 1), 0.0)
        upper = np.where(x < n, beta.ppf(1 - alpha / 2, x + 1, n - x), 1.0)
    lower = np.where(n > 0, lower, np.nan)
    upper = np.where(n > 0, upper, np.nan)
    return lower, upper
