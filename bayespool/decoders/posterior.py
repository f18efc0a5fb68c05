"""The result of decoding: per-specimen probabilities, calls, and what the decoder knows besides.

A :class:`Posterior` is data: arrays plus a few summaries. ``to_frame()`` gives the table that
``bayespool decode`` writes; ``summary()`` the dictionary behind ``--json``.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd


from ..decisions import CALLS, INCONCLUSIVE, UNTESTED, Decision, DecisionRule, decide
from ..defaults import NEGATIVE_BELOW as DEFAULT_NEGATIVE_BELOW
from ..defaults import POSITIVE_ABOVE as DEFAULT_POSITIVE_ABOVE
from ..result_protocol import Result


def call_codes(probability: np.ndarray, negative_below: float, positive_above: float) -> np.ndarray:
    """0 negative, 1 inconclusive, 2 positive, by the two thresholds alone."""
    p = np.asarray(probability)
    return np.where(p < negative_below, 0, np.where(p > positive_above, 2, 1)).astype(np.int8)


@dataclass(eq=False, repr=False)
class Posterior(Result):
    """Posterior P(x_i = 1 | readouts) for every specimen of a run, with the decoder's diagnostics.

    ``method`` names the decoder (``exact``, ``bp``, ``gibbs`` or a mix such as ``exact+bp``);
    ``sample_method`` says which decoder produced each specimen's probability. ``log_evidence`` is
    the log marginal likelihood of the readouts when the decoder knows it (exact), else None.
    ``count_distribution[c]`` is P(number of positive specimens = c) when known. ``draws`` are kept
    joint posterior draws (draws x specimens, uint8) when the decoder produces them.

    Calls follow ``rule`` (:class:`bayespool.decisions.DecisionRule`: thresholds, batch targets),
    by default the two thresholds; a specimen in no read pool (``columns["pools"] == 0``) is
    ``untested``. ``batch`` (what the batch can expect of its calls) and ``model_check`` (the
    posterior predictive check of the readouts) are the dictionaries of ``--json`` when computed.

    References
    ----------
    What the batch can expect of its calls: Müller, Parmigiani, Robert & Rousseau (2004),
    JASA 99 (posterior expected false discoveries and misses).

    Examples
    --------
    >>> from pathlib import Path
    >>> from bayespool import decode, read_assay, read_run
    >>> demo = Path("datasets/demo")
    >>> run = read_run(demo / "layout.csv", demo / "readouts.csv", demo / "samples.csv")
    >>> posterior = decode(run, read_assay(demo / "assay.toml"))
    >>> posterior["SW1-A1"]["call"], posterior.to_frame().index.name
    ('negative', 'sample')
    >>> print(str(posterior).splitlines()[0])
    288 samples, 84 pools, 84 readouts, decoded by exact: 4 positive, 279 negative, 5 inconclusive
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
    rule: DecisionRule | None = None
    batch: dict | None = None
    model_check: dict | None = None
    n_pools: int | None = None
    n_readouts: int | None = None

    @property
    def n_samples(self) -> int:
        return len(self.sample_ids)

    @property
    def decision_rule(self) -> DecisionRule:
        """The rule in force: ``rule``, or the two thresholds."""
        if self.rule is not None:
            return self.rule
        return DecisionRule(self.negative_below, self.positive_above)

    @property
    def tested(self) -> np.ndarray:
        """True for specimens in at least one read pool."""
        pools = self.columns.get("pools")
        if pools is None:
            return np.ones(self.n_samples, dtype=bool)
        return np.asarray(pools) > 0

    def decision(self) -> Decision:
        """Calls and the rule behind each (computed once per rule and probabilities)."""
        key = (id(self.probability), self.decision_rule)
        cached = getattr(self, "_decision", None)
        if cached is None or cached[0] != key:
            cached = (key, decide(self.probability, self.decision_rule, self.tested))
            self._decision = cached
        return cached[1]

    def call_codes(self) -> np.ndarray:
        """0 negative, 1 inconclusive, 2 positive, 3 untested."""
        return self.decision().codes

    def calls(self) -> np.ndarray:
        return self.decision().calls()

    def counts(self) -> dict:
        c = self.decision().counts()
        return {"positive": c["positive"], "negative": c["negative"],
                "inconclusive": c["inconclusive"], "untested": c["untested"]}

    def undecided(self) -> np.ndarray:
        """Indices of specimens still to decide: inconclusive or untested."""
        codes = self.call_codes()
        return np.flatnonzero((codes == INCONCLUSIVE) | (codes == UNTESTED))

    def problems(self) -> list[str]:
        """Why the result should not be relied on as it stands (``--strict`` exits 3 on any):
        a decoder that did not converge, readouts that do not fit the assay model, targets that
        leave specimens undecided."""
        out = []
        if self.diagnostics.get("converged") is False:
            out.append("the decoder did not converge on some linked groups (see the warnings)")
        check = self.model_check
        if check and check.get("warnings"):
            out.append(f"the readouts do not fit the assay model (posterior predictive "
                       f"p = {check['p_value']:.3g})")
        if self.decision_rule.has_targets:
            c = self.counts()
            left = c["inconclusive"] + c["untested"]
            if left:
                out.append(f"{left} specimen(s) stay undecided: the readouts at hand cannot "
                           "meet the targets for every specimen (plan more tests)")
        return out

    def index_of(self, sample_id) -> int:
        """Position of a specimen ID, in O(1) (the ID -> position table is built on first use)."""
        table = self.__dict__.get("_index")
        if table is None or len(table) != len(self.sample_ids):
            table = {str(s): i for i, s in enumerate(self.sample_ids)}
            self.__dict__["_index"] = table
        try:
            return table[str(sample_id)]
        except KeyError:
            raise KeyError(sample_id) from None

    def probability_of(self, sample_id) -> float:
        return float(self.probability[self.index_of(sample_id)])

    def __getitem__(self, sample_id) -> dict:
        """One specimen's answer: ``posterior["S0012"]`` -> ``{"sample", "probability", "call",
        "prior"}`` (plus ``mcse`` from a sampler), found in O(1); the call is the one
        ``to_frame()`` shows (the rule in force, batch targets included; ``untested`` for a
        specimen in no read pool)."""
        i = self.index_of(sample_id)
        row = {"sample": str(self.sample_ids[i]), "probability": float(self.probability[i]),
               "call": CALLS[int(self.call_codes()[i])],
               "prior": float(self.prior[i])}
        if self.mcse is not None:
            row["mcse"] = float(self.mcse[i])
        return row

    def __contains__(self, sample_id) -> bool:
        try:
            self.index_of(sample_id)
        except KeyError:
            return False
        return True

    def _brief(self) -> str:
        c = self.counts()
        return (f"{self.n_samples} specimens by {self.method}: {c['positive']} "
                f"positive, {c['negative']} negative, {c['inconclusive']} inconclusive")

    def __str__(self) -> str:
        from .posterior_text import posterior_text
        return posterior_text(self)

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
        """``probability, call`` plus prior, decoder and the extra columns, indexed by ``sample``."""
        frame = pd.DataFrame({"sample": self.sample_ids, "probability": self.probability,
                              "call": self.calls(), "call_rule": self.decision().rules,
                              "prior": self.prior, "method": self.sample_method})
        if self.mcse is not None:
            frame["mcse"] = self.mcse
        for name, values in self.columns.items():
            frame[name] = values
        return frame.set_index("sample")

    def summary(self) -> dict:
        """A JSON-ready summary."""
        out = {"method": self.method, "samples": self.n_samples, "calls": self.counts(),
               "thresholds": {"negative_below": self.negative_below,
                              "positive_above": self.positive_above},
               "rule": self.decision_rule.to_dict(),
               "positives": self.positives_summary(),
               "log_evidence": self.log_evidence}
        if self.batch is not None:
            out["batch"] = self.batch
        if self.model_check is not None:
            out["model_check"] = self.model_check
        out.update({k: v for k, v in self.diagnostics.items()})
        if self.warnings:
            out["warnings"] = list(self.warnings)
        return out
