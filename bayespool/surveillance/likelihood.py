"""The likelihood of a prevalence p given pooled readouts, read by an imperfect assay.

A pool of k specimens holds d ~ Binomial(k, p) positives. Given d, each of its r readouts is
positive with probability theta_d = P(positive | k, d): 1 - Sp for d = 0 and Se(k, d) otherwise, so
the sensitivity may fall with dilution (Tu, Litvak & Pagano 1995, Statistics in Medicine 14,
1611-1620). The readouts of one pool share d, so a pool with m positive readouts of r contributes

    P_m(p) = sum_d Binomial(d; k, p) theta_d^m (1 - theta_d)^(r - m).

Without an assay the test is perfect (theta_0 = 0, theta_d = 1), the classic model of Thompson
(1962) and Walter, Hildreth & Beaty (1980).

Derivatives in p are exact finite differences of the readout probabilities in d:
d^j/dp^j sum_d Binomial(d; k, p) c(d) = k!/(k - j)! sum_d Binomial(d; k - j, p) Delta^j c(d).
Pools are grouped into cells of equal (k, r, m), so the cost grows with the number of distinct
pool sizes, not with the number of pools.
"""
from __future__ import annotations

from dataclasses import dataclass
from math import perm

import numpy as np
from scipy.special import comb, gammaln
from scipy.stats import binom

from ..errors import ImpossibleEvidenceError

__all__ = ["PoolCells", "PooledLikelihood", "Moments"]


@dataclass(frozen=True)
class PoolCells:
    """Pools summarised as cells of equal pool size ``size``, readouts ``reads`` and positive
    readouts ``positives``; ``count`` pools per cell."""

    size: np.ndarray
    reads: np.ndarray
    positives: np.ndarray
    count: np.ndarray

    @classmethod
    def from_pools(cls, size, n_positive, n_negative) -> "PoolCells":
        """Cells from per-pool sizes and counts of positive and negative readouts (pools without a
        readout are left out)."""
        k = np.asarray(size, dtype=np.int64)
        pos = np.asarray(n_positive, dtype=np.int64)
        reads = pos + np.asarray(n_negative, dtype=np.int64)
        keep = reads > 0
        if not keep.any():
            z = np.zeros(0, dtype=np.int64)
            return cls(z, z, z, z)
        table = np.stack([k[keep], reads[keep], pos[keep]], axis=1)
        cells, count = np.unique(table, axis=0, return_counts=True)
        return cls(cells[:, 0], cells[:, 1], cells[:, 2], count.astype(np.int64))

    @property
    def pools(self) -> int:
        return int(self.count.sum())

    @property
    def specimens(self) -> int:
        return int((self.size * self.count).sum())

    def positive_pools(self) -> int:
        """Pools with at least one positive readout."""
        return int(self.count[self.positives > 0].sum())

    def equal_sizes(self) -> bool:
        return len(np.unique(self.size)) == 1

    def single_reads(self) -> bool:
        return bool((self.reads == 1).all())


@dataclass(frozen=True)
class Moments:
    """Log-likelihood, score, observed and expected information, and the expected third moments
    of the score at one p (the ingredients of every estimator and interval)."""

    loglik: float
    score: float
    observed: float      # -d2 loglik / dp2
    expected: float      # E[score^2] (Fisher information)
    third: float         # E[score^3], the third cumulant of the score
    kappa_111: float     # E[d3 loglik / dp3]
    kappa_11_1: float    # E[d2 loglik / dp2 * score]


class _SizeClass:
    """All cells of one (k, r): the readout probabilities c_m(d) for every m = 0..r."""

    def __init__(self, k: int, r: int, theta: np.ndarray):
        self.k, self.r = k, r
        m = np.arange(r + 1)[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            # theta^m (1 - theta)^(r - m), with 0^0 = 1 (a perfect assay)
            c = np.where(m == 0, 1.0, theta[None, :] ** m) * \
                np.where(m == r, 1.0, (1.0 - theta[None, :]) ** (r - m))
        self.c = c                                    # (r + 1, k + 1)
        self.outcomes = comb(r, np.arange(r + 1))     # sequences with m positives
        self.diffs = [np.diff(c, n=j, axis=1) if j <= k else None for j in range(4)]
        self.falling = [float(perm(k, j)) for j in range(4)]
        d = np.arange(k + 1)
        self.log_choose = [gammaln(k - j + 1) - gammaln(d[:k - j + 1] + 1) - gammaln(k - j - d[:k - j + 1] + 1)
                           if j <= k else None for j in range(4)]

    def pmf(self, j: int, p: float) -> np.ndarray:
        """Binomial(d; k - j, p), d = 0..k - j, exact at p = 0 and p = 1."""
        return self.pmf_matrix(np.array([p], dtype=float), j)[0]

    def pmf_matrix(self, p: np.ndarray, j: int = 0) -> np.ndarray:
        """Binomial(d; k - j, p) for every p (rows), d = 0..k - j, exact at p = 0 and p = 1."""
        n = self.k - j
        d = np.arange(n + 1)
        inner = (p > 0.0) & (p < 1.0)
        q = np.where(inner, p, 0.5)[:, None]
        out = np.exp(self.log_choose[j] + d * np.log(q) + (n - d) * np.log1p(-q))
        out[p <= 0.0] = (d == 0)
        out[p >= 1.0] = (d == n)
        return out

    def derivatives(self, p: float) -> np.ndarray:
        """P_m and its first three derivatives in p, shape (4, r + 1)."""
        out = np.zeros((4, self.r + 1))
        for j in range(4):
            if j <= self.k:
                out[j] = self.falling[j] * (self.diffs[j] @ self.pmf(j, p))
        return out


class PooledLikelihood:
    """L(p) for a set of pool cells under an assay (None = perfect test).

    Parameters
    ----------
    cells : PoolCells
        The pools.
    assay : bayespool.assay.Assay or None
        Specificity and Se(k, d); None means Se = Sp = 1.
    source : str, optional
        The file named by an error (pool sizes that a sensitivity table does not cover).
    """

    def __init__(self, cells: PoolCells, assay=None, source: str | None = None):
        self.cells = cells
        self.assay = assay
        if assay is not None and len(cells.size):
            assay.sensitivity.check_pool_sizes(cells.size, source)
        self._classes: dict[tuple[int, int], _SizeClass] = {}
        for k, r in {(int(k), int(r)) for k, r in zip(cells.size, cells.reads)}:
            self._classes[(k, r)] = _SizeClass(k, r, self.theta(k))
        self._cells_of = {key: [] for key in self._classes}
        for i, (k, r) in enumerate(zip(cells.size, cells.reads)):
            self._cells_of[(int(k), int(r))].append(i)
        self._check_possible()

    # ---- the assay
    def theta(self, k: int) -> np.ndarray:
        """P(positive readout | pool of k with d positives), d = 0..k."""
        return self.theta_of(self.assay, k)

    @staticmethod
    def theta_of(assay, k: int) -> np.ndarray:
        """:meth:`theta` of ``assay`` (None: a perfect test)."""
        d = np.arange(k + 1)
        if assay is None:
            return (d > 0).astype(float)
        return assay.positive_probability(np.full(k + 1, k), d).astype(float)

    def positive_probability(self, k: int, p) -> np.ndarray:
        """P(one readout of a pool of k is positive) at prevalence(s) p."""
        theta = self.theta(k)
        p = np.atleast_1d(np.asarray(p, dtype=float))
        return binom.pmf(np.arange(k + 1)[None, :], k, p[:, None]) @ theta

    @property
    def perfect(self) -> bool:
        return self.assay is None

    def _check_possible(self) -> None:
        """Readouts that no number of positives explains (e.g. a perfect assay read both ways)."""
        for key, cls in self._classes.items():
            for i in self._cells_of[key]:
                m = int(self.cells.positives[i])
                if not (cls.c[m] > 0).any():
                    raise ImpossibleEvidenceError(
                        f"a pool of {cls.k} read {m} positive and {cls.r - m} negative cannot be "
                        "explained by any number of positive members under "
                        + ("a perfect assay (Se = Sp = 1)" if self.perfect else "this assay"))

    # ---- values
    def loglik(self, p) -> np.ndarray:
        """log L(p), vectorised over p (-inf where the readouts are impossible)."""
        p = np.atleast_1d(np.asarray(p, dtype=float))
        out = np.zeros(len(p))
        for key, cls in self._classes.items():
            idx = self._cells_of[key]
            m = self.cells.positives[idx]
            cnt = self.cells.count[idx].astype(float)
            prob = cls.c[m] @ cls.pmf_matrix(p).T          # (cells, prevalences)
            with np.errstate(divide="ignore"):
                out += cnt @ np.log(prob)
        return out

    def moments(self, p: float) -> Moments:
        """Everything at one p in (0, 1)."""
        ll = score = observed = expected = third = k111 = k11_1 = 0.0
        for key, cls in self._classes.items():
            idx = self._cells_of[key]
            m = self.cells.positives[idx]
            cnt = self.cells.count[idx].astype(float)
            der = cls.derivatives(p)                     # (4, r + 1)
            P, P1, P2, P3 = der
            with np.errstate(divide="ignore", invalid="ignore"):
                s = P1 / P
                h = P2 / P - s * s                            # d2 log P
                t = P3 / P - 3.0 * P2 * P1 / P ** 2 + 2.0 * s ** 3   # d3 log P
            with np.errstate(divide="ignore"):
                ll += float(cnt @ np.log(P[m]))
            score += float(cnt @ s[m])
            observed -= float(cnt @ h[m])
            w = cls.outcomes * P                          # P(m positive readouts of r)
            ok = w > 0
            n_pools = float(cnt.sum())
            expected += n_pools * float(w[ok] @ (s[ok] ** 2))
            third += n_pools * float(w[ok] @ (s[ok] ** 3))
            k111 += n_pools * float(w[ok] @ t[ok])
            k11_1 += n_pools * float(w[ok] @ (h[ok] * s[ok]))
        return Moments(ll, score, observed, expected, third, k111, k11_1)

    def score(self, p: float) -> float:
        return self.moments(p).score

    def upper_search_limit(self) -> float:
        """Largest p at which every pool's readout probabilities are still representable: beyond
        it (1 - p)^k underflows for the largest pool (and never above 1 - 1e-9)."""
        kmax = int(self.cells.size.max()) if len(self.cells.size) else 1
        return min(1.0 - 1e-9, float(-np.expm1(np.log(1e-250) / kmax)))
