"""The Bayesian loop: decode, plan the most informative next pools, read them, repeat.

Each round decodes every readout so far (:func:`bayespool.decoders.decode`), plans a batch by expected
information gain (:func:`bayespool.planning.plan`), and reads it through the :class:`Tester`; the loop
stops when every specimen is decided (by the thresholds or the batch targets, after at least one
readout) or when no test within the limits would tell anything more.
Specimens still undecided then are called by whether their probability exceeds one half. The first
round starts from the priors alone, so its pools are sized for information at the prevalence. This
is sequential Bayesian experimental design (Lindley 1956; for pooled tests Cuturi, Teboul & Vert
2020, arXiv:2004.12508).
"""
from __future__ import annotations

import threading

import numpy as np
import pandas as pd

from ...decoders.exact import ExactMemo
from ...errors import InputError
from ..protocol import Outcome, Protocol, Tester

DEFAULT_TESTS_PER_ROUND = 96   # one plate per round
DEFAULT_RELATIVE = 0.5          # a round takes tests telling at least half of its best one
DEFAULT_MAX_ROUNDS = 40

_LOCAL = threading.local()


def worker_memo() -> ExactMemo:
    """The memo shared by every loop unpickled in this thread (a Dask worker plays many blocks
    of cohorts, each arriving as a fresh copy of the protocol). Entries are keyed by everything an
    enumeration reads, so sharing one across cells changes no number; one per thread, since a
    worker may run several tasks at once."""
    memo = getattr(_LOCAL, "memo", None)
    if memo is None:
        memo = _LOCAL.memo = ExactMemo()
    return memo


class BayesianLoop(Protocol):
    """Decode -> plan -> read, round after round, until every specimen is decided."""

    name = "bayes"

    def __init__(self, max_pool_size: int | None = None, tests: int | None = None,
                 negative_below: float | None = None, positive_above: float | None = None,
                 method: str | None = None, max_draws: int | None = None,
                 n_draws: int | None = None, relative_information: float | None = None,
                 max_rounds: int | None = None, seed=None,
                 target_sensitivity: float | None = None,
                 max_false_discovery: float | None = None, remember: bool = True):
        """``tests``: tests per round (at most); ``method``: the decoder; ``max_draws``: material
        per specimen over the whole loop; ``relative_information``: a round keeps tests worth at
        least this fraction of its best one; ``seed``: the planner's draws (else from the
        Tester); ``target_sensitivity``, ``max_false_discovery``: batch targets
        (:mod:`bayespool.decisions`): the loop tests until they call every specimen;
        ``remember``: keep exact enumerations of components across rounds and cohorts
        (:class:`~bayespool.decoders.exact.ExactMemo`: the same numbers, several times faster; off
        only to check that)."""
        from ...decisions import DecisionRule
        from ...defaults import METHODS
        from ...planning import DEFAULT_MAX_POOL_SIZE
        from ...planning.draws import DEFAULT_DRAWS
        self.max_pool_size = DEFAULT_MAX_POOL_SIZE if max_pool_size is None else int(max_pool_size)
        self.tests_per_round = DEFAULT_TESTS_PER_ROUND if tests is None else int(tests)
        self.method = "auto" if method is None else str(method)
        if self.method not in METHODS:
            raise InputError(f"unknown method {self.method!r} (choose one of "
                             f"{', '.join(METHODS)})")
        self.rule = DecisionRule(negative_below, positive_above, target_sensitivity,
                                 max_false_discovery)
        self.max_draws = max_draws  # total material per specimen over the whole loop
        self.n_draws = DEFAULT_DRAWS if n_draws is None else int(n_draws)
        self.relative_information = (DEFAULT_RELATIVE if relative_information is None
                                     else float(relative_information))
        self.max_rounds = DEFAULT_MAX_ROUNDS if max_rounds is None else int(max_rounds)
        self.seed = seed
        if self.max_pool_size < 1 or self.tests_per_round < 1 or self.max_rounds < 1:
            raise InputError("the bayes scheme needs a pool size, tests per round and rounds >= 1")
        self.last_posterior = None
        self.undecided_at_end = 0
        self.remember = bool(remember)
        self._memo = ExactMemo() if self.remember else None

    def __getstate__(self):  # the memo stays where it was filled (it can be large)
        state = dict(self.__dict__)
        state["_memo"] = None
        state["last_posterior"] = None
        return state

    def __setstate__(self, state):  # where it lands, it takes that process's (thread's) memo
        self.__dict__.update(state)
        self._memo = worker_memo() if self.remember else None

    def parameters(self) -> dict:
        return {"max_pool_size": self.max_pool_size, "tests": self.tests_per_round,
                "method": self.method,
                **self.rule.to_dict(),
                "relative_information": self.relative_information,
                "posterior_draws": self.n_draws, "material_limit": self.max_draws}

    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        from ...planning import plan
        from ...run import Run
        n = tester.n
        ids = pd.DataFrame({"sample": [f"S{i}" for i in range(n)]})
        run = Run.from_frames(pd.DataFrame({"pool": [], "sample": []}), None, ids)
        run = run.with_prior(prior)
        rng = np.random.default_rng(tester.rng.integers(2**63) if self.seed is None else self.seed)
        for _ in range(self.max_rounds):
            post = self._decode(run, tester, rng)
            left = None
            if self.max_draws is not None:
                left = np.maximum(self.max_draws - tester.draws, 0)
            nxt = plan(run, tester.assay, posterior=post, tests=self.tests_per_round,
                       method=self.method,
                       max_pool_size=self.max_pool_size, max_draws=left,
                       n_draws=self.n_draws, seed=rng, min_information=0.0,
                       relative_information=self.relative_information,
                       replicates_use_material=True,  # the Tester counts every reading
                       exact_memo=self._memo)
            if nxt.n_tests == 0:
                break
            results = tester.read_round(nxt.pool_ptr, nxt.pool_members)
            run = nxt.extend(run, results, ct=tester.last_ct)  # last_ct: a [ct] assay's Cts
        else:
            post = self._decode(run, tester, rng)
        self.last_posterior = post
        codes = post.call_codes()
        left = (codes == 1) | (codes == 3)
        self.undecided_at_end = int(np.sum(left))
        calls = (codes == 2) | (left & (post.probability > 0.5))
        return tester.outcome(calls)

    def _decode(self, run, tester, rng):
        from ...decoders import decode
        r = self.rule
        return decode(run, tester.assay, method=self.method, negative_below=r.negative_below,
                      positive_above=r.positive_above, target_sensitivity=r.target_sensitivity,
                      max_false_discovery=r.max_false_discovery, seed=int(rng.integers(2**31)),
                      expectations=False, model_check=False, exact_memo=self._memo)
