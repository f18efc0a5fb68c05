"""Dorfman pools, then a code design on each positive pool, decoded by the Bayesian decoder.

Round 1 reads pools of ``k`` consecutive specimens; a negative pool clears its members. Round 2
lays the members of every positive pool out as codewords of a single-error-correcting code
(:func:`bayespool.design.code.code_design`: about log2 k + 3 pools instead of k individual tests)
and reads those pools. The readouts of each positive pool and its code pools are decoded together
by :func:`bayespool.decoders.decode` with the assay model (dilution included); a lone positive is
named despite one wrong readout. Members still undecided (probability between the thresholds, e.g.
two positives in one pool under a noisy assay) are tested alone in round 3 and decoded again; the
last call is probability > 1/2. A positive pool of one specimen is that specimen's test.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np

from ...defaults import NEGATIVE_BELOW, POSITIVE_ABOVE
from ...design.base import check_max_pool_size
from ...design.dorfman import dorfman_blocks
from ...errors import InputError
from ...validation import check_choice, check_count
from ..protocol import Outcome, Protocol, Tester, singles


@lru_cache(maxsize=None)
def _code_layout(k: int, errors: int):
    """(ptr, positions) of the code design's pools over positions 0..k-1."""
    from ...design.code import code_design
    d = code_design(k, errors=errors)
    return d.pool_ptr.astype(np.int64), d.pool_members.astype(np.int64)


class PoolThenCode(Protocol):
    """Dorfman pools of ``pool_size``; each positive pool's members in one code round."""

    name = "pool-then-code"

    def __init__(self, pool_size: int | None = None, max_pool_size: int | None = None,
                 method: str | None = None, negative_below: float | None = None,
                 positive_above: float | None = None, errors: int = 1):
        from ...defaults import METHODS
        if pool_size is None:
            raise InputError("the pool-then-code scheme needs `pool_size`")
        self.pool_size = check_count(pool_size, "pool_size")
        limit = check_max_pool_size(max_pool_size)
        if limit is not None and self.pool_size > limit:
            raise InputError(f"`pool_size` {self.pool_size} exceeds `max_pool_size` {limit}")
        self.method = "auto" if method is None else check_choice(method, "method", METHODS)
        self.negative_below = NEGATIVE_BELOW if negative_below is None else float(negative_below)
        self.positive_above = POSITIVE_ABOVE if positive_above is None else float(positive_above)
        self.errors = check_count(errors, "errors")

    def parameters(self) -> dict:
        return {"pool_size": self.pool_size, "method": self.method, "errors": self.errors}

    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        ptr, members = dorfman_blocks(tester.n, self.pool_size)
        sizes = np.diff(ptr)
        first = tester.read_round(ptr, members)
        calls = np.repeat(first & (sizes == 1), sizes)
        follow = np.flatnonzero(first & (sizes > 1))
        if not len(follow):
            return tester.outcome(calls)
        # round 2: a code design on each positive pool's members
        groups = [members[ptr[t]:ptr[t + 1]].astype(np.int64) for t in follow]
        code_sets = []
        for mem in groups:
            cp, cm = _code_layout(len(mem), self.errors)
            code_sets += [mem[cm[cp[s]:cp[s + 1]]] for s in range(len(cp) - 1)]
        code_ptr = np.concatenate([[0], np.cumsum([len(c) for c in code_sets])]).astype(np.int64)
        second = tester.read_round(code_ptr, np.concatenate(code_sets))
        # the decoder's view: the positive stage-1 pools and their code pools
        pool_sets = groups + code_sets
        results = np.concatenate([np.ones(len(groups), dtype=bool), second])
        involved = np.concatenate(groups)
        codes = self._decode(tester, prior, involved, pool_sets, results)
        undecided = involved[(codes > self.negative_below) & (codes < self.positive_above)]
        if len(undecided):
            alone = tester.read_round(*singles(undecided))
            pool_sets += [np.array([i]) for i in undecided]
            results = np.concatenate([results, alone])
            codes = self._decode(tester, prior, involved, pool_sets, results)
        calls[involved] = codes > 0.5
        return tester.outcome(calls)

    def _decode(self, tester, prior, involved, pool_sets, results) -> np.ndarray:
        """Posterior probabilities of ``involved`` specimens given the listed pools' readouts."""
        from ...decoders import decode
        from ...run import Run
        index = np.full(tester.n, -1, dtype=np.int64)
        index[involved] = np.arange(len(involved))
        owner = np.repeat(np.arange(len(pool_sets)), [len(p) for p in pool_sets])
        member = index[np.concatenate(pool_sets)]
        run = Run.from_arrays(owner, member, len(involved), len(pool_sets),
                              np.asarray(prior, dtype=float)[involved],
                              np.arange(len(pool_sets)), results.astype(np.int64))
        post = decode(run, tester.assay, method=self.method, negative_below=self.negative_below,
                      positive_above=self.positive_above,
                      seed=int(tester.rng.integers(2**31)))
        return post.probability
