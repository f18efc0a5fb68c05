"""Conjugate update of a shared prevalence with a Beta prior.

With statuses x_1..x_n i.i.d. Bernoulli(pi) given pi ~ Beta(a, b), pi | x ~ Beta(a + sum x,
b + n - sum x) (Gelman et al., Bayesian Data Analysis, 3rd ed., section 2.4). Sampled once per sweep,
jointly with the statuses; every specimen's prior log-odds is then logit(pi).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from ...errors import InputError
from .rng import beta

_EDGE = 1e-12  # keep pi inside (0, 1) so that its logit stays finite


@njit(cache=True)
def draw_prevalence(rng, a, b, positives, n):
    """pi | x; returns (pi, logit(pi))."""
    pi = beta(rng, a + positives, b + n - positives)
    pi = min(max(pi, _EDGE), 1.0 - _EDGE)
    return pi, np.log(pi) - np.log1p(-pi)


def parse_beta_prior(value, name: str = "prevalence_prior") -> tuple[float, float]:
    """``(a, b)`` or the text ``"A,B"``: both strictly positive and finite."""
    parts = value.replace(":", ",").split(",") if isinstance(value, str) else value
    try:
        a, b = (float(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(f"{name} expects two numbers A,B (a Beta(A, B) prior), got {value!r}",
                         parameters=(name,)) from None
    if not (a > 0 and b > 0 and math.isfinite(a) and math.isfinite(b)):
        raise InputError(f"{name}: the prevalence prior Beta(A, B) needs A > 0 and B > 0, got "
                         f"{a:g}, {b:g}", parameters=(name,))
    return a, b


class PrevalenceMove:
    """Draw the shared prevalence from its Beta full conditional once per sweep."""

    name = "prevalence"

    def __init__(self, a: float = 1.0, b: float = 1.0):
        self.a, self.b = parse_beta_prior((a, b))

    def __repr__(self) -> str:
        return f"PrevalenceMove(a={self.a:g}, b={self.b:g})"
