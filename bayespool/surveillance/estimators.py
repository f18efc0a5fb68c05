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
from scipy.special import expit

from . import bracket
from .likelihood import PooledLikelihood

__all__ = ["Estimate", "maximum_likelihood", "bias_corrected", "minimum_infection_rate"]



@dataclass(frozen=True)
class Estimate:
    """A point estimate and, when it sits on the edge of [0, 1], which edge and why."""

    value: float
    bound: str | None = None   # "lower" or "upper" when the estimate is an edge of [0, 1]


def _root_in_unit(f, lik: PooledLikelihood, guess: float) -> Estimate:
    """The root of a decreasing estimating function f on (0, 1) nearest ``guess``; 0 when f is
    not positive down to the bottom of the search, 1 when it stays positive to the top."""
    u = bracket.grid(lik.upper_search_limit())
    s = bracket.nearest(f, u, guess)
    with np.errstate(all="ignore"):
        above = f(expit(u[s])) > 0
    if above:
        i, j = bracket.walk(f, u, s, +1, lambda v: v > 0)
        return Estimate(1.0, "upper") if j is None else Estimate(bracket.refine(f, u, i, j))
    i, j = bracket.walk(f, u, s, -1, lambda v: v <= 0)
    return Estimate(0.0, "lower") if j is None else Estimate(bracket.refine(f, u, j, i))


def maximum_likelihood(lik: PooledLikelihood) -> Estimate:
    """The prevalence that maximises L(p) on [0, 1]: the root of the score, or 0 when the score is
    negative already at p = 0 (no positive pool, or, under an imperfect assay, fewer positive
    readouts than false positives would give), or 1 when every pool reads positive."""
    if lik.score(0.0) <= 0:
        return Estimate(0.0, "lower")
    return _root_in_unit(lik.score, lik, guess=max(minimum_infection_rate(lik), 1e-6))


def bias_corrected(lik: PooledLikelihood, mle: Estimate | None = None) -> Estimate:
    """Firth's bias-corrected estimate (the root of the modified score); 0 when the MLE is 0 under
    a perfect test (Burrows' estimate is then 0 as well). The search starts at the MLE."""
    def modified(p):
        m = lik.moments(p)
        return m.score - (m.kappa_111 + 2.0 * m.kappa_11_1) / (2.0 * m.expected)
    if lik.perfect and lik.cells.positive_pools() == 0:
        return Estimate(0.0, "lower")
    mle = mle or maximum_likelihood(lik)
    return _root_in_unit(modified, lik, guess=min(max(mle.value, 1e-9), 1 - 1e-9))


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
