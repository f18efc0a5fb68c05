"""Classic two-stage Dorfman testing (Dorfman 1943, Annals of Mathematical Statistics 14(4)).

Stage 1 reads consecutive pools of ``k``. A negative pool clears its members. Every member of a
positive pool is then tested alone and that readout is its call. A pool of one specimen is that
specimen's individual test. With test error the expected cost and accuracy are the closed forms of
Kim et al. (2007), Biometrics 63(4) (see :mod:`bayespool.design.closed_form`).

``run`` plays one cohort through a :class:`Tester`; ``run_batch`` plays many cohorts at once with
the same rule in array operations (no loop over specimens or runs). For a single cohort both draw
the same random numbers in the same order, so with one seed they give identical results.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...design.base import check_max_pool_size
from ...validation import check_count
from ...design.dorfman import dorfman_blocks
from ...errors import InputError
from ..protocol import Outcome, Protocol, Tester, singles


@dataclass
class BatchOutcome:
    """Outcomes of many runs: calls (runs, n) bool, tests and rounds (runs,), draws (runs, n)."""

    calls: np.ndarray
    tests: np.ndarray
    rounds: np.ndarray
    draws: np.ndarray


class DorfmanTesting(Protocol):
    """Pools of ``pool_size`` consecutive specimens; members of positive pools retested alone."""

    name = "dorfman"

    def __init__(self, pool_size: int | None = None, max_pool_size: int | None = None):
        if pool_size is None:
            raise InputError("the dorfman scheme needs pool_size", parameters=("pool_size",))
        self.pool_size = check_count(pool_size, "pool_size")
        limit = check_max_pool_size(max_pool_size)
        if limit is not None and self.pool_size > limit:
            raise InputError(f"pool_size {self.pool_size} exceeds max_pool_size {limit}",
                             parameters=("pool_size", "max_pool_size"))

    def parameters(self):
        return {"pool_size": self.pool_size}

    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        ptr, members = dorfman_blocks(tester.n, self.pool_size)
        pool_pos = tester.read_round(ptr, members)
        sizes = np.diff(ptr)
        calls = np.repeat(pool_pos & (sizes == 1), sizes)
        retest = np.flatnonzero(np.repeat(pool_pos & (sizes > 1), sizes))
        if len(retest):
            calls[retest] = tester.read_round(*singles(retest))
        return tester.outcome(calls)

    def run_batch(self, truth: np.ndarray, assay, rng: np.random.Generator) -> BatchOutcome:
        """The same rule on many cohorts: ``truth`` is bool (runs, n)."""
        truth = np.asarray(truth, dtype=bool)
        runs, n = truth.shape
        ptr, _ = dorfman_blocks(n, self.pool_size)
        sizes = np.diff(ptr)
        positives = (np.add.reduceat(truth, ptr[:-1], axis=1, dtype=np.int64) if n
                     else np.zeros((runs, 0), dtype=np.int64))
        p_pool = assay.positive_probability(np.broadcast_to(sizes, positives.shape), positives)
        pool_pos = rng.random(p_pool.shape) < p_pool
        member_pos = np.repeat(pool_pos, sizes, axis=1)
        retest = member_pos & np.repeat(sizes > 1, sizes)[None, :]
        calls = member_pos & ~retest
        idx = np.nonzero(retest)  # row-major: the order a per-run loop would read them in
        ones = np.ones(len(idx[0]), dtype=np.int64)
        p_alone = assay.positive_probability(ones, truth[idx].astype(np.int64))
        calls[idx] = rng.random(len(ones)) < p_alone
        n_retest = retest.sum(axis=1)
        tests = len(sizes) + n_retest
        rounds = (1 if len(sizes) else 0) + (n_retest > 0)
        draws = 1 + retest.astype(np.int64)
        return BatchOutcome(calls, tests.astype(np.int64), np.asarray(rounds, dtype=np.int64),
                            draws)

    def expected(self, n, prevalence, assay):
        from ...design.closed_form import dorfman_cohort_expected
        out = dorfman_cohort_expected(prevalence, n, self.pool_size, assay).to_dict()
        out["source"] = "Kim et al. 2007" + (" with Se(k, d)" if assay.sensitivity.depends_on_count()
                                             else "")
        return out
