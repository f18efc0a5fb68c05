"""The difference of two prevalences estimated from pools, with a profile-likelihood interval.

delta = p_A - p_B. The profile log-likelihood l(delta) = max over p_B of l_A(p_B + delta) + l_B(p_B)
(both in [0, 1]); the interval holds the delta with 2 (l_max - l(delta)) <= chi2_1(level), and the
likelihood-ratio test of delta = 0 gives the p-value. Likelihood-based intervals for the difference
of pooled prevalences are among those Biggerstaff (2008, JABES 13, 478-496) compared (from memory).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar
from scipy.stats import chi2

from .likelihood import PooledLikelihood

__all__ = ["Difference", "difference"]


@dataclass(frozen=True)
class Difference:
    """p_A - p_B (per ``per`` specimens) with its interval and the test of no difference."""

    a: str
    b: str
    estimate: float
    lower: float
    upper: float
    p_value: float
    level: float
    per: float = 1.0
    method: str = "profile likelihood"

    def to_dict(self) -> dict:
        return {"a": self.a, "b": self.b, "estimate": self.estimate, "lower": self.lower,
                "upper": self.upper, "p_value": self.p_value, "level": self.level,
                "per": self.per, "method": self.method}

    def __str__(self) -> str:
        return (f"{self.a} minus {self.b}: {self.estimate:.4g} per {self.per:g}, "
                f"{self.level:.0%} interval {self.lower:.4g} to {self.upper:.4g} "
                f"({self.method}); no-difference p = {self.p_value:.3g}")


def _profile(lik_a: PooledLikelihood, lik_b: PooledLikelihood, delta: float) -> float:
    lo, hi = max(0.0, -delta), min(1.0, 1.0 - delta)
    f = lambda q: -float(lik_a.loglik(q + delta)[0] + lik_b.loglik(q)[0])
    if hi - lo < 1e-15:
        return -f(lo)
    res = minimize_scalar(f, bounds=(lo, hi), method="bounded", options={"xatol": 1e-13})
    return -min(float(res.fun), f(lo), f(hi))


def difference(lik_a: PooledLikelihood, lik_b: PooledLikelihood, p_a: float, p_b: float, *,
               level: float, names=("A", "B"), per: float = 1.0) -> Difference:
    """The difference p_a - p_b of two groups' maximum likelihood estimates with its profile
    likelihood interval and likelihood-ratio p-value."""
    top = float(lik_a.loglik(p_a)[0] + lik_b.loglik(p_b)[0])
    est = p_a - p_b
    cut = float(chi2.ppf(level, 1))
    with np.errstate(all="ignore"):
        def outside(d):
            v = 2.0 * (top - _profile(lik_a, lik_b, d)) - cut
            return min(v, 1e300)   # an impossible delta is far outside, not inf

        def limit(end):
            prev = est
            for frac in (1e-4, 1e-3, 1e-2, 0.05, 0.2, 0.5, 1.0):
                d = est + frac * (end - est)
                if outside(d) > 0:
                    return float(brentq(outside, prev, d, xtol=1e-13))
                prev = d
            return end

        lower, upper = limit(-1.0), limit(1.0)
        stat = max(0.0, 2.0 * (top - _profile(lik_a, lik_b, 0.0)))
    return Difference(str(names[0]), str(names[1]), est * per, lower * per, upper * per,
                      float(chi2.sf(stat, 1)), level, per)
