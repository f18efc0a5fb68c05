"""The prevalence likelihood integrated over the fitted assay's uncertainty.

Every pool of a batch is read by the same assay, so an error in the fitted specificity or
sensitivity is shared by all of them: it shifts the whole estimate rather than averaging out. The
integrated likelihood (Berger, Liseo & Wolpert 1999, Statistical Science 14, 1-28) averages the
likelihood of the whole data over the assay's distribution,

    L(p) = E_assay[ prod_t P_t(p | assay) ] ~ (1/M) sum_m prod_t P_t(p | assay_m),

with the M assays drawn from the ``[fit.uncertainty]`` table that ``calibrate`` writes (the
specificity's Jeffreys posterior Beta(a, b) at M evenly spaced quantiles, paired in turn with the
sensitivity draws). Maximising it gives the estimate; the likelihood-ratio and Bayesian intervals
on it are wider than with the assay taken as known, by what the calibration did not pin down.
Score-based intervals and Firth's correction need derivatives of one assay's likelihood and are
not defined here.
"""
from __future__ import annotations

import numpy as np
from scipy.special import logsumexp
from scipy.stats import beta as beta_dist

from ..assay import Assay
from .likelihood import PoolCells, PooledLikelihood, _SizeClass

DRAWS = 200  # assays averaged over when the fit gives no sensitivity draws (specificity only)
METHODS = ("likelihood", "bayes")


def draw_count(assay, n: int = DRAWS) -> int:
    """How many assays :func:`assay_draws` gives."""
    sens = len(assay.sens_draws) or 1
    return max(n, sens) if assay.spec_beta is not None else sens


def assay_draws(assay, n: int = DRAWS) -> list[Assay]:
    """Assays drawn evenly from an :class:`~bayespool.assay_spread.IntegratedAssay`'s spread."""
    sens = list(assay.sens_draws) or [assay.sensitivity]
    m = draw_count(assay, n)
    if assay.spec_beta is None:
        spec = np.full(m, assay.specificity)
    else:
        a, b = assay.spec_beta
        spec = beta_dist.ppf((np.arange(m) + 0.5) / m, a, b)
    return [Assay(float(spec[i]), sens[i % len(sens)]) for i in range(m)]


class IntegratedLikelihood:
    """L(p) averaged over assays (see the module docstring); the interface the estimators and
    the likelihood-ratio and Bayesian intervals use (``loglik``, ``score``, ``cells``).

    The readout probabilities of every assay are stacked per pool size, so one evaluation costs a
    few matrix products whatever the number of assays."""

    perfect = False

    def __init__(self, cells: PoolCells, assay, source: str | None = None,
                 n_draws: int = DRAWS):
        self.cells = cells
        self.assay = assay
        draws = assay_draws(assay, n_draws)
        self.n_assays = len(draws)
        first = PooledLikelihood(cells, draws[0], source)   # checks sizes and possibility
        self._limit = first.upper_search_limit()
        self._classes = []
        for key, cls in first._classes.items():
            idx = first._cells_of[key]
            k, r = key
            stack = [cls] + [_SizeClass(k, r, PooledLikelihood.theta_of(a, k)) for a in draws[1:]]
            c = np.stack([x.c for x in stack])                     # (assays, r + 1, k + 1)
            m = cells.positives[idx]
            self._classes.append((cls, c[:, m, :], np.diff(c, axis=2)[:, m, :],
                                  cells.count[idx].astype(float)))

    def _each(self, p) -> np.ndarray:
        """log L_m(p), assays x prevalences."""
        p = np.atleast_1d(np.asarray(p, dtype=float))
        out = np.zeros((self.n_assays, len(p)))
        for cls, c, _, cnt in self._classes:
            prob = c @ cls.pmf_matrix(p).T                      # (assays, cells, prevalences)
            with np.errstate(divide="ignore"):
                out += np.einsum("c,acp->ap", cnt, np.log(prob))
        return out

    def loglik(self, p) -> np.ndarray:
        return logsumexp(self._each(p), axis=0) - np.log(self.n_assays)

    def score(self, p: float) -> float:
        """d/dp log L(p): the assays' scores weighted by their share of the likelihood at p."""
        each = self._each(p)[:, 0]
        if not np.isfinite(each).any():
            return float("nan")
        w = np.exp(each - logsumexp(each))
        score = np.zeros(self.n_assays)
        for cls, c, dc, cnt in self._classes:
            prob = c @ cls.pmf(0, p)                            # (assays, cells)
            slope = cls.k * (dc @ cls.pmf(1, p)) if cls.k else np.zeros_like(prob)
            with np.errstate(divide="ignore", invalid="ignore"):
                score += np.where(prob > 0, slope / prob, 0.0) @ cnt
        return float(w[w > 0] @ score[w > 0])

    def upper_search_limit(self) -> float:
        return self._limit
