"""Closed forms for Dorfman's two-stage procedure, with and without test error, and the best pool size.

Without error (Dorfman 1943, The detection of defective members of large populations, Annals of
Mathematical Statistics 14(4)): pools of ``k`` cost ``1/k + 1 - (1 - p)^k`` tests per specimen.

With sensitivity ``Se`` and specificity ``Sp`` (Kim, Hudgens, Dreyfuss, Westreich & Pilcher 2007,
Comparison of group testing algorithms for case identification in the presence of test error,
Biometrics 63(4)), ``q = 1 - p``: tests per specimen ``1/k + Se - (Se + Sp - 1) q^k``, pooled
sensitivity ``Se^2``, pooled specificity ``1 - (1 - Sp)(Se - (Se + Sp - 1) q^(k-1))``.

Here the same derivation runs with sensitivity falling with dilution, ``Se(k, d)`` (Hwang 1976,
Group testing with a dilution effect, Biometrika 63(3)): a pool reads positive with probability
``(1 - Sp) q^k + sum_d Binom(k, p)[d] Se(k, d)``; a positive specimen is called positive when its
pool (with ``1 + Binom(k - 1, p)`` positives) and then its own test read positive; a negative one
when its pool (``Binom(k - 1, p)`` positives) reads positive and its own test falsely does. With a
constant Se these are exactly the Kim et al. expressions. A pool of one specimen is that specimen's
individual test (one test, its result the call).
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd
from scipy.stats import binom

from ..assay import Assay, ConstantSensitivity
from ..result_protocol import Result, spell
from ..validation import check_count, check_open_probability
from .base import check_max_pool_size

PERFECT = Assay(1.0, ConstantSensitivity(1.0))


def dorfman_tests_per_specimen(p: float, k: int) -> float:
    """Dorfman (1943): expected tests per specimen with pools of k and an error-free test."""
    if k == 1:
        return 1.0
    return 1.0 / k + 1.0 - (1.0 - p) ** k


@dataclass(frozen=True)
class DorfmanExpectation:
    """Expected operating characteristics of Dorfman testing with pools of ``pool_size``."""

    pool_size: int
    prevalence: float
    tests_per_sample: float
    sensitivity: float
    specificity: float
    ppv: float | None
    npv: float | None
    pool_positive: float  # P(a pool reads positive)

    def to_dict(self) -> dict:
        return asdict(self)


def _mean_se(assay: Assay, k: int, positives: np.ndarray, weights: np.ndarray) -> float:
    """sum_d weights[d] * P(positive readout | k, positives[d])."""
    value = np.sum(weights * assay.positive_probability(np.full(len(positives), k), positives))
    return float(min(max(value, 0.0), 1.0))  # the binomial weights may sum to 1 + 1e-16


def dorfman_expected(prevalence: float, pool_size: int, assay: Assay | None = None
                     ) -> DorfmanExpectation:
    """Kim et al. (2007) closed forms, generalised to Se(k, d); ``assay=None`` means error-free."""
    p = check_open_probability(prevalence, "prevalence")
    k = check_count(pool_size, "pool_size")
    assay = PERFECT if assay is None else assay
    sp = assay.specificity
    se1 = float(assay.positive_probability(np.array([1]), np.array([1]))[0])
    if k == 1:
        tests, sens, fp = 1.0, se1, 1.0 - sp
        pool_pos = p * se1 + (1 - p) * (1 - sp)
    else:
        d = np.arange(k + 1)
        pool_pos = _mean_se(assay, k, d, binom.pmf(d, k, p))
        others = np.arange(k)
        w = binom.pmf(others, k - 1, p)
        pool_pos_if_pos = _mean_se(assay, k, others + 1, w)
        pool_pos_if_neg = _mean_se(assay, k, others, w)
        tests = 1.0 / k + pool_pos
        sens = se1 * pool_pos_if_pos
        fp = (1.0 - sp) * pool_pos_if_neg
    spec = 1.0 - fp
    called_pos = p * sens + (1 - p) * fp
    called_neg = p * (1 - sens) + (1 - p) * spec
    ppv = p * sens / called_pos if called_pos > 0 else None
    npv = (1 - p) * spec / called_neg if called_neg > 0 else None
    return DorfmanExpectation(k, p, float(tests), float(sens), float(spec), ppv, npv,
                              float(pool_pos))


def individual_expected(prevalence: float, assay: Assay | None = None) -> DorfmanExpectation:
    """Testing every specimen alone: one test each, Se(1, 1) and Sp."""
    return dorfman_expected(prevalence, 1, assay)


@dataclass(repr=False)
class DorfmanOptimum(Result):
    """The pool size with the fewest expected tests per specimen, and the whole curve.

    ``to_frame()`` is the curve, one row per pool size tried (index ``pool_size``); ``assay`` is
    the assay the closed forms used (None: an error-free test) and ``capped`` says whether the
    search stopped at a ``max_pool_size`` the caller gave.

    References
    ----------
    Dorfman (1943), Ann. Math. Statist. 14(4); Kim et al. (2007), Biometrics 63(4).

    Examples
    --------
    >>> import bayespool
    >>> opt = bayespool.optimal_dorfman(0.05)
    >>> opt.best.pool_size, opt.to_frame().index.name
    (5, 'pool_size')
    """

    best: DorfmanExpectation
    table: pd.DataFrame      # one row per pool size tried
    saves: bool              # False when no pool size beats individual testing
    max_pool_size: int
    at_limit: bool = False   # the best is the largest size searched: a larger one may be better
    target_sensitivity: float | None = None  # only sizes meeting it competed
    meets_target: bool = True  # False: no size meets the target; the most sensitive is given
    assay: Assay | None = None
    capped: bool = False

    def summary(self) -> dict:
        out = self.best.to_dict()
        out.update({"pooling_saves": self.saves, "max_pool_size": self.max_pool_size,
                    "at_limit": self.at_limit, "target_sensitivity": self.target_sensitivity,
                    "meets_target": self.meets_target,
                    "tests_saved_percent": 100.0 * (1.0 - self.best.tests_per_sample)})
        out["assay"] = self.assay.describe() if self.assay is not None else "error-free"
        return out

    def to_frame(self) -> pd.DataFrame:
        return self.table.set_index("pool_size")

    def _brief(self) -> str:
        return (f"pool_size={self.best.pool_size}, tests_per_sample="
                f"{self.best.tests_per_sample:.4f}, prevalence={self.best.prevalence:g}")

    def __str__(self) -> str:
        b, assay = self.best, self.assay
        source = ("Kim et al. 2007 closed forms" + (" with dilution" if
                  assay.sensitivity.model != "constant" else "")) if assay else \
            "error-free test, Dorfman 1943"
        lines = [f"Dorfman pooling at prevalence {b.prevalence:g} ({source})"]
        if not self.saves and self.target_sensitivity is None:
            lines.append(f"  pooling saves nothing at this prevalence: test each specimen alone "
                         f"(pool sizes 2 to {self.max_pool_size} all cost more)")
        limit = ""
        if self.at_limit:
            k = spell("max_pool_size")
            limit = (f" (the {k} limit: larger pools would cost fewer tests)" if self.capped
                     else f" (the largest size searched: a larger {k} may do better)")
        if self.target_sensitivity is not None:
            lines.append(f"  among pool sizes with a sensitivity of at least "
                         f"{self.target_sensitivity:g}"
                         + ("" if self.meets_target else ": none reaches it, so the most sensitive"))
        lines.append(f"  best pool size: {b.pool_size}{limit}")
        lines.append(f"  expected tests per specimen: {b.tests_per_sample:.4f} "
                     f"({100 * (1 - b.tests_per_sample):.1f}% fewer than one test each)")
        lines.append(f"  pooled sensitivity: {b.sensitivity:.4f}, pooled specificity: "
                     f"{b.specificity:.4f}")
        t = self.table.sort_values("tests_per_sample").head(5).sort_values("pool_size")
        lines.append("  nearby: " + ", ".join(f"k={int(r.pool_size)}: {r.tests_per_sample:.4f}"
                                              for r in t.itertuples()))
        return "\n".join(lines)


def default_max_pool_size(prevalence: float) -> int:
    """Far enough past the optimum near 1/sqrt(p) to be sure it is inside the search."""
    return int(min(1000, max(64, math.ceil(4.0 / math.sqrt(prevalence)))))


def optimal_dorfman(prevalence: float, assay: Assay | None = None, *,
                    max_pool_size: int | None = None,
                    target_sensitivity: float | None = None) -> DorfmanOptimum:
    """Best Dorfman pool size (fewest expected tests per specimen) for k = 1..max_pool_size.

    Dorfman (1943) without error; Kim et al. (2007) (with Se(k, d) as above) with an assay. k = 1 is
    individual testing; when it wins, pooling saves nothing at that prevalence. With
    ``target_sensitivity``, only pool sizes whose closed-form sensitivity meets it compete; when
    none does (not even testing alone), ``meets_target`` is False and the most sensitive size is
    returned.

    Parameters
    ----------
    prevalence : float
        The expected fraction of positive specimens, strictly between 0 and 1.
    assay : Assay, optional
        The assay (default: an error-free test).
    max_pool_size : int, optional
        The largest pool size searched (default: far enough past 1/sqrt(p)).
    target_sensitivity : float, optional
        Only pool sizes whose sensitivity meets it compete.

    Returns
    -------
    DorfmanOptimum

    Raises
    ------
    InputError
        A prevalence outside (0, 1) or a bad option (naming the parameter).

    References
    ----------
    Dorfman, R. (1943). Ann. Math. Statist. 14(4), 436-440; Kim, Hudgens, Dreyfuss, Westreich &
    Pilcher (2007). Biometrics 63(4), 1152-1163.

    Examples
    --------
    >>> import bayespool
    >>> best = bayespool.optimal_dorfman(0.02).best
    >>> best.pool_size, round(best.tests_per_sample, 3)
    (8, 0.274)
    """
    p = check_open_probability(prevalence, "prevalence")
    limit = check_max_pool_size(max_pool_size)
    kmax = default_max_pool_size(p) if limit is None else limit
    sizes = list(range(1, kmax + 1))
    entries = getattr(getattr(assay, "sensitivity", None), "entries", None)
    if entries is not None:  # a table assay: only the pool sizes it covers (1 for follow-ups)
        covered = {e[0] for e in entries}
        sizes = [k for k in sizes if k in covered or k == 1]
    rows = [dorfman_expected(p, k, assay) for k in sizes]
    table = pd.DataFrame([r.to_dict() for r in rows])
    meets = True
    pool = rows
    if target_sensitivity is not None:
        from ..decisions import DecisionRule
        target = DecisionRule(target_sensitivity=target_sensitivity).target_sensitivity
        pool = [r for r in rows if r.sensitivity >= target - 1e-12]
        meets = bool(pool)
        if not pool:
            pool = [max(rows, key=lambda r: (r.sensitivity, -r.pool_size))]
    best = min(pool, key=lambda r: (round(r.tests_per_sample, 12), r.pool_size))
    return DorfmanOptimum(best, table, best.pool_size > 1, kmax,
                          at_limit=best.pool_size == sizes[-1] and len(sizes) > 1,
                          target_sensitivity=target_sensitivity, meets_target=meets,
                          assay=assay, capped=limit is not None)


def dorfman_cohort_expected(prevalence: float, n: int, pool_size: int,
                            assay: Assay | None = None) -> DorfmanExpectation:
    """The closed forms for ``n`` specimens in consecutive blocks of ``pool_size``.

    When ``n`` is not a multiple of the pool size the last, smaller pool is weighed in by its
    specimens, so the result is what a simulation of exactly this cohort estimates.
    """
    k = check_count(pool_size, "pool_size")
    n = check_count(n, "n")
    full, rest = divmod(n, k)
    parts = [(full * k, dorfman_expected(prevalence, k, assay))] if full else []
    if rest:
        parts.append((rest, dorfman_expected(prevalence, rest, assay)))
    if len(parts) == 1:
        e = parts[0][1]
        return DorfmanExpectation(k, e.prevalence, e.tests_per_sample, e.sensitivity,
                                  e.specificity, e.ppv, e.npv, e.pool_positive)
    p = parts[0][1].prevalence
    w = np.array([m for m, _ in parts], dtype=float) / n
    tests = float(sum(wi * e.tests_per_sample for wi, (_, e) in zip(w, parts)))
    sens = float(sum(wi * e.sensitivity for wi, (_, e) in zip(w, parts)))
    spec = float(sum(wi * e.specificity for wi, (_, e) in zip(w, parts)))
    called_pos = p * sens + (1 - p) * (1 - spec)
    called_neg = p * (1 - sens) + (1 - p) * spec
    pools = full + (1 if rest else 0)
    pool_pos = float(sum(e.pool_positive * (m // e.pool_size) for m, e in parts) / pools)
    return DorfmanExpectation(k, p, tests, sens, spec,
                              p * sens / called_pos if called_pos > 0 else None,
                              (1 - p) * spec / called_neg if called_neg > 0 else None, pool_pos)
