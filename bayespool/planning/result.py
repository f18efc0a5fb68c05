"""The result of planning: the next pools, what each should tell, and how to fold them in."""
from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from ..result_protocol import Result, membership_index
from ..csr import CSR
from ..run import PoolIncidence, Run
from .candidates import KINDS

COLUMNS = ["pool", "sample", "kind", "positive_probability", "information_bits", "follows_pool"]


@dataclass(eq=False, repr=False)
class Plan(PoolIncidence, Result):
    """The next batch of pools for a run.

    ``by_pool``: members (specimen indices of the run) of each planned pool, a
    :class:`~bayespool.csr.CSR` (``pool_ptr``/``pool_members`` are its arrays). ``information`` is each pool's expected
    information in bits given the pools planned before it; ``total_information`` the joint
    information of the whole batch. ``kind`` is one of retest, pool, split, replicate;
    ``follows`` the read pool a split or replicate follows up (or -1). ``decided`` is True when
    every specimen was already decided, so nothing was planned. ``calls`` counts the calls of
    the posterior the plan started from (positive, negative, inconclusive, untested).

    ``to_frame()`` is the layout of the planned pools, one row per membership (index
    ``membership``), in the columns of :data:`COLUMNS`.

    References
    ----------
    Expected information gain from joint posterior draws (Cuturi, Teboul & Vert (2020),
    arXiv:2004.12508).

    Examples
    --------
    >>> from bayespool import decode, plan, read_assay, read_run
    >>> files = [f"datasets/demo/{name}.csv" for name in ("layout", "readouts", "samples")]
    >>> run, assay = read_run(*files), read_assay("datasets/demo/assay.toml")
    >>> result = plan(run, assay, posterior=decode(run, assay), tests=3, seed=2)
    >>> result.summary()["tests"], result.to_frame().index.name
    (3, 'membership')
    """

    sample_ids: np.ndarray
    pool_ids: np.ndarray
    by_pool: CSR
    kind: np.ndarray
    follows: np.ndarray
    positive_probability: np.ndarray
    information: np.ndarray
    total_information: float
    undecided: int
    decided: bool
    existing_pool_ids: np.ndarray
    stop: str = "full"
    n_draws: int = 0
    notes: list = field(default_factory=list)
    calls: dict = field(default_factory=dict)

    @property
    def n_tests(self) -> int:
        return len(self.pool_ids)

    def to_frame(self) -> pd.DataFrame:
        """The layout of the planned pools (``pool, sample``) with per-pool columns."""
        owner = np.repeat(np.arange(self.n_tests), self.pool_size)
        follows = np.array([self.existing_pool_ids[t] if t >= 0 else "" for t in self.follows],
                           dtype=object)
        kinds = np.asarray(KINDS, dtype=object)[self.kind] if self.n_tests else np.zeros(0, object)
        return pd.DataFrame({
            "pool": self.pool_ids[owner], "sample": self.sample_ids[self.pool_members],
            "kind": kinds[owner], "positive_probability": self.positive_probability[owner],
            "information_bits": self.information[owner], "follows_pool": follows[owner]},
            columns=COLUMNS, index=membership_index(len(owner)))

    def summary(self) -> dict:
        kinds = {k: int(np.sum(self.kind == i)) for i, k in enumerate(KINDS)}
        return {"tests": self.n_tests, "memberships": int(len(self.pool_members)),
                "undecided": self.undecided, "decided": self.decided,
                "information_bits": self.total_information,
                "kinds": {k: v for k, v in kinds.items() if v}, "stop": self.stop,
                "draws": self.n_draws, "notes": list(self.notes)}

    def __str__(self) -> str:
        n = len(self.sample_ids)
        if self.decided:
            return f"every sample is decided ({n} samples): no test to plan"
        c = self.calls
        head = (f"{n} samples: {c.get('positive', 0)} positive, {c.get('negative', 0)} negative, "
                f"{c.get('inconclusive', 0)} undecided\n") if c else ""
        return (head + f"planned {self.n_tests} pools ({len(self.pool_members)} memberships), "
                f"expected information {self.total_information:.2f} bits")

    def _brief(self) -> str:
        return (f"{self.n_tests} pools, {len(self.pool_members)} memberships, "
                f"{self.total_information:.2f} bits, stop={self.stop!r}")

    def extend(self, run: Run, positive, ct=None) -> Run:
        """A new run: ``run`` with the planned pools added and read once each (``positive``: bool
        per pool; ``ct``: each readout's Ct, NaN for none, under a [ct] assay)."""
        positive = np.asarray(positive, dtype=bool)
        if len(positive) != self.n_tests:
            raise ValueError(f"{len(positive)} readouts for {self.n_tests} planned pools")
        old_owner = np.repeat(np.arange(run.n_pools), run.pool_size)
        new_owner = run.n_pools + np.repeat(np.arange(self.n_tests), self.pool_size)
        n_pools = run.n_pools + self.n_tests
        grown = Run.from_arrays(np.concatenate([old_owner, new_owner]),
                                np.concatenate([run.pool_members, self.pool_members]),
                                run.n_samples, n_pools, run.prior, sample_ids=run.sample_ids,
                                pool_ids=np.concatenate([run.pool_ids, self.pool_ids]))
        new_pools = run.n_pools + np.arange(self.n_tests)
        return replace(run, pool_ids=grown.pool_ids, by_pool=grown.by_pool,
                       by_sample=grown.by_sample,
                       n_positive=np.concatenate([run.n_positive, positive.astype(np.int32)]),
                       n_negative=np.concatenate([run.n_negative, (~positive).astype(np.int32)]),
                       readout_ct=run.more_ct(new_pools, positive.astype(np.int64), ct))
