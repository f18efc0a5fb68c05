"""What every simulated testing protocol is: given a cohort's hidden truth, run tests, return calls.

A protocol sees the truth only through ``Tester``, which draws readouts from the assay model for the
pools it is asked to read and counts tests, rounds and draws per specimen. Each protocol is a small
class in its own module of :mod:`bayespool.simulation.protocols`.
"""
from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass

import numpy as np

from ..assay import Assay


@dataclass
class Outcome:
    """What one run of a protocol on one cohort produced."""

    calls: np.ndarray          # bool (n,), True = called positive
    tests: int                 # readouts used
    rounds: int                # sequential rounds of testing (turnaround)
    draws: np.ndarray          # int (n,), times each specimen's material was used


class Tester:
    """Reads pools of a hidden cohort through the assay; the only way a protocol touches truth."""

    def __init__(self, truth: np.ndarray, assay: Assay, rng: np.random.Generator):
        self._truth = np.asarray(truth, dtype=bool)
        self.assay = assay
        self.rng = rng
        self.tests = 0
        self.rounds = 0
        self.draws = np.zeros(len(self._truth), dtype=np.int64)
        self.last_ct = None  # Ct of each readout of the last round (NaN: no amplification)
        self._ct = None
        if assay.ct is not None:  # each positive's individual Ct, shared by all its pools
            self._ct = np.full(len(self._truth), np.nan)
            self._ct[self._truth] = assay.ct.draw_individual_ct(int(self._truth.sum()), rng)

    @property
    def n(self) -> int:
        return len(self._truth)

    def read_round(self, pool_ptr: np.ndarray, members: np.ndarray) -> np.ndarray:
        """Read one round of pools given as CSR (ptr, members); returns True for positive readouts."""
        sizes = np.diff(pool_ptr)
        owner = np.repeat(np.arange(len(sizes)), sizes)
        positives = np.bincount(owner, weights=self._truth[members], minlength=len(sizes))
        self.tests += len(sizes)
        self.rounds += 1 if len(sizes) else 0
        np.add.at(self.draws, members, 1)
        if self._ct is None:
            return self.assay.draw_readouts(sizes, positives.astype(np.int64), self.rng)
        self.last_ct = self._read_ct(sizes, owner, members)
        return np.isfinite(self.last_ct)

    def _read_ct(self, sizes, owner, members) -> np.ndarray:
        """One Ct readout per pool from the load model (NaN where nothing amplifies)."""
        m = self.assay.ct
        s = m.cycles_per_doubling
        amount = np.bincount(owner, weights=np.nan_to_num(np.exp2(-self._ct[members] / s)),
                             minlength=len(sizes))
        with np.errstate(divide="ignore"):
            pool_ct = np.where(amount > 0, m.pool_shift(np.maximum(sizes, 1))
                               - s * np.log2(np.where(amount > 0, amount, 1.0)), np.inf)
        y = m.draw_readout_ct(pool_ct, self.rng)
        false = (amount == 0) & (self.rng.random(len(sizes)) < 1.0 - self.assay.specificity)
        y[false] = self.rng.uniform(m.false_positive_low, m.cutoff, int(false.sum()))
        return y

    def outcome(self, calls: np.ndarray) -> Outcome:
        return Outcome(np.asarray(calls, dtype=bool), self.tests, self.rounds, self.draws.copy())


class Protocol(ABC):
    """A testing protocol: ``run`` decides every specimen of a cohort using a Tester."""

    name: str = ""

    @abstractmethod
    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        """Test the cohort (prior: per-specimen prior probabilities) and return the calls."""

    def parameters(self) -> dict:
        """The protocol's settings, for reports and JSON (override to list them)."""
        return {}

    def expected(self, n: int, prevalence: float, assay: Assay) -> dict | None:
        """Closed-form operating characteristics for ``n`` specimens at one prevalence, if known."""
        return None


def singles(indices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """CSR (ptr, members) of individual tests of the given specimens, one pool each."""
    idx = np.asarray(indices, dtype=np.int64)
    return np.arange(len(idx) + 1, dtype=np.int64), idx
