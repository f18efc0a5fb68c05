"""Point estimates of a prevalence from pools: maximum likelihood, bias-corrected, minimum rate.

- Maximum likelihood for pools of unequal sizes (Walter, Hildreth & Beaty 1980, Am J Epidemiol 112,
  124-128); with equal sizes and a perfect test it is Thompson's (1962, Biometrics 18, 568-578)
  closed form 1 - (1 - x/n)^(1/k).
- Firth's bias correction (Firth 1993, Biometrika 80, 27-38) as applied to pooled testing by
  Hepworth & Biggerstaff (2017, JABES 22, 602-614): the root of the modified score
  U*(p) = U(p) - (kappa_111 + 2 kappa_11,1) / (2 I(p)), i.e. U minus I times the first-order bias of
  Cox & Snell (1968). For equal sizes and a perfect test it equals Burrows (1987, Phytopathology 77,
  363-365): 1 - ((n - x + a)/(n + a))^(1/k), a = (k - 1)/(2k).
- The minimum infection rate: positive pools per specimen (as if each positive pool held one).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.special import expit, logit

from .likelihood import PooledLikelihood

__all__ = ["Estimate", "maximum_likelihood", "bias_corrected", "minimum_infection_rate",
           "SEARCH_FROM"]

SEARCH_FROM = 1e-12   # the smallest prevalence searched; an estimate below it is reported as 0


@dataclass(frozen=True)
class Estimate:
    """A point estimate and, when it sits on the edge of [0, 1], which edge and why."""

    value: float
    bound: str | None = None   # "lower" or "upper" when the estimate is an edge of [0, 1]


def _root_in_unit(f, lik: PooledLikelihood) -> Estimate:
    """The first root of an estimating function f that falls from positive to negative on (0, 1),
    bracketed on a logit grid and refined by Brent's method; 0 when f is not positive at the
    bottom, 1 when it never turns negative. Points where f cannot be evaluated (underflow far
    from the data) are skipped."""
    u = np.linspace(logit(SEARCH_FROM), logit(lik.upper_search_limit()), 160)
    prev = None
    for i, q in enumerate(expit(u)):
        with np.errstate(all="ignore"):
            v = f(q)
        if not np.isfinite(v):
            continue
        if prev is None:
            if v <= 0:
                return Estimate(0.0, "lower")
        elif v < 0:
            root = brentq(lambda x: f(expit(x)), u[prev], u[i], xtol=1e-14, rtol=8.9e-16,
                          maxiter=500)
            return Estimate(float(expit(root)))
        prev = i
    return Estimate(1.0, "upper")


def maximum_likelihood(lik: PooledLikelihood) -> Estimate:
    """The prevalence that maximises L(p) on [0, 1]: the root of the score, or 0 when the score is
    negative already at p = 0 (no positive pool, or, under an imperfect assay, fewer positive
    readouts than false positives would give), or 1 when every pool reads positive."""
    if lik.score(0.0) <= 0:
        return Estimate(0.0, "lower")
    return _root_in_unit(lik.score, lik)


def bias_corrected(lik: PooledLikelihood) -> Estimate:
    """Firth's bias-corrected estimate (the root of the modified score); 0 when the MLE is 0 under
    a perfect test (Burrows' estimate is then 0 as well)."""
    def modified(p):
        m = lik.moments(p)
        return m.score - (m.kappa_111 + 2.0 * m.kappa_11_1) / (2.0 * m.expected)
    if lik.perfect and lik.cells.positive_pools() == 0:
        return Estimate(0.0, "lower")
    return _root_in_unit(modified, lik)


def minimum_infection_rate(lik: PooledLikelihood) -> float:
    """Positive pools per specimen tested: a lower bound on the rate under a perfect test, biased
    low when pools are large or the prevalence is not small."""
    n = lik.cells.specimens
    return lik.cells.positive_pools() / n if n else float("nan")


def positive_fraction(lik: PooledLikelihood) -> float:
    """Positive readouts per readout."""
    c = lik.cells
    reads = float((c.reads * c.count).sum())
    return float((c.positives * c.count).sum()) / reads if reads else float("nan")


def clipped_note(lik: PooledLikelihood, est: Estimate) -> str | None:
    """Under an imperfect assay, why an estimate of 0 is clipped."""
    if est.bound == "lower" and not lik.perfect and lik.cells.positive_pools() > 0:
        frac = positive_fraction(lik)
        return (f"the positive fraction {frac:.4g} is at or below what false positives alone would "
                f"give (1 - Sp = {1 - lik.assay.specificity:.4g}): the estimate is clipped at 0")
    if est.bound == "upper":
        return "every pool read positive: the estimate is at the upper edge, 1"
    return None
