"""Root brackets for functions of a prevalence: a walk along a logit grid, then Brent's method.

Estimating functions and interval boundaries of pooled-testing likelihoods are smooth but can
span many orders of magnitude in p (1e-6 for rare vectors, 0.5 for herds), and far from the data
they may underflow; walking a fixed logit grid from a good starting point finds the sign change
nearest that point in a few evaluations and never needs a value far from the data.
"""
from __future__ import annotations

import numpy as np
from scipy.optimize import brentq
from scipy.special import expit, logit

SEARCH_FROM = 1e-12   # the smallest prevalence searched; a root below it is reported as 0
STEPS = 240           # grid points between SEARCH_FROM and the upper search limit


def grid(hi: float) -> np.ndarray:
    """The logit grid over [SEARCH_FROM, hi]."""
    return np.linspace(logit(SEARCH_FROM), logit(hi), STEPS)


def nearest(f, u: np.ndarray, p: float) -> int:
    """The grid index nearest p at which f can be evaluated (not NaN), moving toward 1/2."""
    i = int(np.argmin(np.abs(u - logit(min(max(p, expit(u[0])), expit(u[-1]))))))
    middle = int(np.argmin(np.abs(u)))
    with np.errstate(all="ignore"):
        while np.isnan(f(expit(u[i]))) and i != middle:
            i += 1 if i < middle else -1
    return i


def walk(f, u: np.ndarray, start: int, direction: int, inside):
    """From grid index ``start``, step ``direction`` (-1 or +1) while ``inside(f(p))`` holds.

    Returns ``(i, j)``: the last inside index and the first outside one, or ``(i, None)`` when the
    walk reached the end of the grid, or a point where f cannot be evaluated (NaN: underflow far
    from the data), while inside.
    """
    i = start
    while True:
        j = i + direction
        if j < 0 or j >= len(u):
            return i, None
        with np.errstate(all="ignore"):
            v = f(expit(u[j]))
        if np.isnan(v):
            return i, None
        if not inside(v):
            return i, j
        i = j


def refine(f, u: np.ndarray, i: int, j: int) -> float:
    """The root of f between grid points i and j, by Brent's method on the logit scale."""
    a, b = sorted((u[i], u[j]))
    finite = lambda v: float(np.clip(f(expit(v)), -1e300, 1e300))   # an infinity is a sign
    with np.errstate(all="ignore"):
        root = brentq(finite, a, b, xtol=1e-14, rtol=8.9e-16, maxiter=500)
    return float(expit(root))
