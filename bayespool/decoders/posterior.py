"""The result of decoding: per-specimen probabilities, calls, and what the decoder knows besides.

A :class:`Posterior` is data: arrays plus a few summaries. ``to_frame()`` gives the table that
``bayespool decode`` writes; ``summary()`` the dictionary behind ``--json``.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd


from ..defaults import NEGATIVE_BELOW as DEFAULT_NEGATIVE_BELOW
from ..defaults import POSITIVE_ABOVE as DEFAULT_POSITIVE_ABOVE
CALLS = ("negative", "inconclusive", "positive")


def call_codes(probability: np.ndarray, negative_below: float, positive_above: float) -> np.ndarray:
    """0 negative, 1 inconclusive, 2 positive."""
    p = np.asarray(probability)
    return np.where(p < negative_below, 0, np.where(p > positive_above, 2, 1)).astype(np.int8)


@dataclass(eq=False)
class Posterior:
    """Posterior P(x_i = 1 | readouts) for every specimen of a run, with the decoder's diagnostics.

    ``method`` names the decoder (``exact``, ``bp``, ``gibbs`` or a mix such as ``exact+bp``);
    ``sample_method`` says which decoder produced each specimen's probability. ``log_evidence`` is
    the log marginal likelihood of the readouts when the decoder knows it (exact), else None.
    ``count_distribution[c]`` is P(number of positive specimens = c) when known. ``draws`` are kept
    joint posterior draws (draws x specimens, uint8) when the decoder produces them.
    """

    sample_ids: np.ndarray
    probability: np.ndarray
    prior: np.ndarray
    method: str
    sample_method: np.ndarray
    negative_below: float = DEFAULT_NEGATIVE_BELOW
    positive_above: float = DEFAULT_POSITIVE_ABOVE
    log_evidence: float | None = None
    mcse: np.ndarray | None = None
    count_distribution: np.ndarray | None = None
    draws: np.ndarray | None = None
    diagnostics: dict = field(default_factory=dict)
    columns: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)

    @property
    def n_samples(self) -> int:
        return len(self.sample_ids)

    def call_codes(self) -> np.ndarray:
        return call_codes(self.probability, self.negative_below, self.positive_above)

    def calls(self) -> np.ndarray:
        return np.asarray(CALLS, dtype=object)[self.call_codes()]

    def counts(self) -> dict:
        c = np.bincount(self.call_codes(), minlength=3)
        return {"positive": int(c[2]), "negative": int(c[0]), "inconclusive": int(c[1])}

    def undecided(self) -> np.ndarray:
        """Indices of specimens whose call is inconclusive."""
        return np.flatnonzero(self.call_codes() == 1)

    def probability_of(self, sample_id) -> float:
        idx = np.flatnonzero(self.sample_ids == sample_id)
        if not len(idx):
            raise KeyError(sample_id)
        return float(self.probability[idx[0]])

    def positives_summary(self) -> dict:
        """Expected number of positive specimens and, when the distribution is known, a 95% interval."""
        out = {"expected": float(self.probability.sum())}
        dist = self.count_distribution
        if dist is not None:
            cdf = np.cumsum(dist)
            out["interval_95"] = [int(np.searchsorted(cdf, 0.025)),
                                  int(np.searchsorted(cdf, 0.975))]
            out["mode"] = int(np.argmax(dist))
        return out

    def to_frame(self) -> pd.DataFrame:
        """``sample, probability, call`` plus prior, decoder and the extra columns."""
        frame = pd.DataFrame({"sample": self.sample_ids, "probability": self.probability,
                              "call": self.calls(), "prior": self.prior,
                              "method": self.sample_method})
        if self.mcse is not None:
            frame["mcse"] = self.mcse
        for name, values in self.columns.items():
            frame[name] = values
        return frame

    def summary(self) -> dict:
        """A JSON-ready summary."""
        out = {"method": self.method, "samples": self.n_samples, "calls": self.counts(),
               "thresholds": {"negative_below": self.negative_below,
                              "positive_above": self.positive_above},
               "positives": self.positives_summary(),
               "log_evidence": self.log_evidence}
        out.update({k: v for k, v in self.diagnostics.items()})
        if self.warnings:
            out["warnings"] = list(self.warnings)
        return out
