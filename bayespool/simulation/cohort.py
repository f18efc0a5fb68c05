"""Cohorts for simulation: hidden statuses drawn independently from per-specimen priors.

A cohort is a prior vector (one prevalence for all, or the priors of a samples file); each run draws
``x_i ~ Bernoulli(prior_i)`` afresh. Draws come in blocks of runs so that memory stays bounded while
the vectorised protocols work on many runs at once; the stream of statuses is the same whatever the
block size.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..design.specimens import Specimens, specimens
from ..errors import InputError
from ..validation import check_open_probability


@dataclass
class Cohort:
    """Specimen IDs and the prior probability that each is positive."""

    ids: np.ndarray
    prior: np.ndarray

    @property
    def n(self) -> int:
        return len(self.prior)

    @property
    def prevalence(self) -> float | None:
        """The common prior when every specimen has the same one, else None."""
        return float(self.prior[0]) if np.all(self.prior == self.prior[0]) else None

    def draw(self, runs: int, rng: np.random.Generator) -> np.ndarray:
        """Statuses of ``runs`` independent cohorts, bool (runs, n)."""
        return rng.random((runs, self.n)) < self.prior[None, :]


def make_cohort(samples, prevalence: float | None = None) -> Cohort:
    """A cohort from ``N`` (with ``prevalence``), a samples file or :class:`Specimens` (priors).

    Specimens without a prior in the samples file take ``prevalence``.
    """
    spec = samples if isinstance(samples, Specimens) else specimens(samples)
    missing = spec.prior is None or bool(np.isnan(spec.prior).any())
    if missing:
        if prevalence is None:
            raise InputError("give prevalence (or a samples file with a prior for every "
                             "specimen)", parameters=("prevalence",))
        prevalence = check_open_probability(prevalence, "prevalence")
    return Cohort(spec.ids, spec.priors(prevalence if missing else 0.5))


def blocks(runs: int, n: int, max_cells: int = 2_000_000):
    """Sizes of consecutive blocks of runs holding at most ``max_cells`` statuses each."""
    per = max(1, max_cells // max(n, 1))
    full, rest = divmod(runs, per)
    return [per] * full + ([rest] if rest else [])
