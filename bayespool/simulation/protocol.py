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
        return self.assay.draw_readouts(sizes, positives.astype(np.int64), self.rng)

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
