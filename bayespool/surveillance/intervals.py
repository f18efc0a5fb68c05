"""Confidence and credible intervals for a prevalence estimated from pools.

- ``score``: the p whose score statistic T(p) = U(p) / sqrt(I(p)) lies within +-z (Rao 1948;
  Wilson's interval for pools of one).
- ``skew-score`` (default): the score interval with the skewness of the score corrected by the
  Cornish-Fisher term, -z <= T(p) - gamma(p) (z^2 - 1) / 6 <= z, gamma = E[U^3] / I^(3/2)
  (Bartlett 1953, Biometrika 40, 12-19; Gart 1991; recommended for pooled testing by Hepworth &
  Biggerstaff 2017, JABES 22, 602-614; references from memory). It keeps nearer the nominal level
  than the plain score interval when positives are few.
- ``likelihood``: the p with 2 (log L(p_hat) - log L(p)) <= chi2_1(level).
- ``exact``: for equal pool sizes and one readout per pool, the Clopper-Pearson interval of the
  positive-pool fraction mapped through the inverse of P(pool positive | p) (Hepworth 1996,
  Biometrics 52, 1134-1146; with a perfect test the map is p = 1 - (1 - pi)^(1/k)).
- ``bayes``: the equal-tailed posterior interval under a Beta(a, b) prior, integrated numerically
  (Gauss-Legendre panels on the logit scale).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq, minimize_scalar
from scipy.special import expit
from scipy.stats import chi2, norm

from ..defaults import PREVALENCE_INTERVALS
from ..errors import InputError
from . import bracket
from .likelihood import PooledLikelihood

__all__ = ["METHODS", "interval"]

METHODS = PREVALENCE_INTERVALS


def _region(outside, estimate: float, hi: float) -> tuple[float, float]:
    """The interval {p : outside(p) <= 0} around the estimate.

    The walk starts at the estimate (or, when a strongly skewed score puts the estimate itself
    outside, at the nearest inside point) and goes down and up the logit grid to the first
    outside points; Brent's method refines each end. An end that reaches the grid's edge, or an
    estimate of 0 (or 1), makes that limit 0 (or 1), the convention at the edge of [0, 1].
    """
    u = bracket.grid(hi)
    s = bracket.nearest(outside, u, estimate)
    is_in = lambda v: v <= 0
    with np.errstate(all="ignore"):
        start_inside = outside(expit(u[s])) <= 0
    if not start_inside:
        found = [j for j in (bracket.walk(outside, u, s, d, lambda v: not v <= 0)[1]
                             for d in (-1, +1)) if j is not None]
        if not found:
            raise ArithmeticError("no prevalence lies inside the interval")  # pragma: no cover
        s = min(found, key=lambda j: abs(j - s))
    a, ja = bracket.walk(outside, u, s, -1, is_in)
    b, jb = bracket.walk(outside, u, s, +1, is_in)
    lower = 0.0 if (ja is None or estimate <= 0) else bracket.refine(outside, u, ja, a)
    upper = 1.0 if (jb is None or estimate >= 1) else bracket.refine(outside, u, b, jb)
    return lower, upper


def _score_interval(lik: PooledLikelihood, level: float, estimate: float, skew: bool):
    z = float(norm.ppf(0.5 + level / 2))
    c = (z * z - 1.0) / 6.0

    def outside(p):
        m = lik.moments(p)
        with np.errstate(all="ignore"):
            info = np.float64(m.expected)
            centred = m.score / np.sqrt(info) - (c * m.third / info ** 1.5 if skew else 0.0)
        return abs(centred) - z if np.isfinite(centred) else np.inf

    return _region(outside, estimate, lik.upper_search_limit())


def _likelihood_interval(lik: PooledLikelihood, level: float, estimate: float):
    cut = float(chi2.ppf(level, 1))
    top = float(lik.loglik(estimate)[0])
    return _region(lambda p: 2.0 * (top - float(lik.loglik(p)[0])) - cut, estimate,
                   lik.upper_search_limit())


def invert_positive_probability(lik: PooledLikelihood, k: int, pi: float) -> float:
    """The prevalence at which one readout of a pool of k is positive with probability pi
    (0 or 1 beyond the range the assay can reach)."""
    f = lambda p: float(lik.positive_probability(k, p)[0]) - pi
    if f(0.0) >= 0:
        return 0.0
    if f(1.0) <= 0:
        return 1.0
    return float(brentq(f, 0.0, 1.0, xtol=1e-15, rtol=8.9e-16, maxiter=500))


def _exact_interval(lik: PooledLikelihood, level: float):
    from ..calibration.intervals import clopper_pearson
    cells = lik.cells
    if not cells.equal_sizes():
        raise InputError("`interval` 'exact' needs pools of one size (Hepworth 1996); these pools "
                         f"have sizes {', '.join(str(int(k)) for k in np.unique(cells.size))}: "
                         "use 'skew-score', 'score', 'likelihood' or 'bayes'")
    if not cells.single_reads():
        raise InputError("`interval` 'exact' needs one readout per pool; some pools have "
                         "replicate readouts: use 'skew-score', 'score', 'likelihood' or 'bayes'")
    k = int(cells.size[0])
    theta = lik.theta(k)
    if not np.all(np.diff(theta) >= 0) or theta[-1] <= theta[0]:
        raise InputError("`interval` 'exact' needs P(pool positive) to rise with the number of "
                         "positive members; this assay's does not")
    lo, up = clopper_pearson(cells.positive_pools(), cells.pools, level)
    return invert_positive_probability(lik, k, float(lo)), invert_positive_probability(lik, k, float(up))


_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(16)


def _bayes_interval(lik: PooledLikelihood, level: float, prior: tuple[float, float]):
    a, b = prior

    def log_density(u):  # the posterior on the logit scale: prior x likelihood x Jacobian
        u = np.atleast_1d(u)
        p = expit(u)
        with np.errstate(divide="ignore"):
            return a * np.log(p) + b * np.log1p(-p) + lik.loglik(p)

    res = minimize_scalar(lambda u: -float(log_density(u)[0]), bounds=(-60.0, 60.0),
                          method="bounded", options={"xatol": 1e-10})
    mode = float(res.x)
    top = float(log_density(mode)[0])
    h = 1e-4
    curv = -(float(log_density(mode + h)[0]) - 2 * top + float(log_density(mode - h)[0])) / h ** 2
    sd = 1.0 / math.sqrt(curv) if curv > 0 else 1.0
    lo_u, hi_u = max(-60.0, mode - 40 * sd), min(60.0, mode + 40 * sd)
    edges = np.linspace(lo_u, hi_u, 401)
    half = np.diff(edges) / 2
    mids = (edges[:-1] + edges[1:]) / 2
    nodes = (mids[:, None] + half[:, None] * _GL_NODES[None, :]).ravel()
    dens = np.exp(log_density(nodes) - top).reshape(len(mids), -1)
    panel = (dens @ _GL_WEIGHTS) * half
    cum = np.concatenate([[0.0], np.cumsum(panel)])
    total = cum[-1]

    def cdf(u):
        j = min(max(int(np.searchsorted(edges, u, side="right")) - 1, 0), len(mids) - 1)
        x0 = edges[j]
        half_j = (u - x0) / 2
        pts = x0 + half_j + half_j * _GL_NODES
        return (cum[j] + float(np.exp(log_density(pts) - top) @ _GL_WEIGHTS) * half_j) / total

    def quantile(q):
        j = min(max(int(np.searchsorted(cum / total, q)) - 1, 0), len(mids) - 1)
        return float(expit(brentq(lambda u: cdf(u) - q, edges[j], edges[j + 1], xtol=1e-13,
                                  rtol=8.9e-16)))

    tail = (1.0 - level) / 2
    return quantile(tail), quantile(1.0 - tail)


def interval(lik: PooledLikelihood, method: str, level: float, estimate: float,
             prior: tuple[float, float] = (1.0, 1.0)) -> tuple[float, float]:
    """Lower and upper limits of a prevalence interval by ``method`` (see :data:`METHODS`).

    Parameters
    ----------
    lik : PooledLikelihood
    method : str
        One of :data:`METHODS`.
    level : float
        Confidence (or credibility) level, strictly between 0 and 1.
    estimate : float
        The maximum likelihood estimate (where the search for the limits starts).
    prior : (a, b)
        Beta prior for ``bayes``.
    """
    if method == "skew-score":
        return _score_interval(lik, level, estimate, skew=True)
    if method == "score":
        return _score_interval(lik, level, estimate, skew=False)
    if method == "likelihood":
        return _likelihood_interval(lik, level, estimate)
    if method == "exact":
        return _exact_interval(lik, level)
    if method == "bayes":
        return _bayes_interval(lik, level, prior)
    raise InputError(f"`interval` must be one of {', '.join(METHODS)}, got {method!r}")

