"""Individual testing: every specimen tested alone once; its readout is the call.

The baseline every pooling scheme is judged against: one test, one draw and one round per specimen,
sensitivity Se(1, 1) and specificity Sp of the assay.
"""
from __future__ import annotations

import numpy as np

from ..protocol import Outcome, Protocol, Tester, singles


class IndividualTesting(Protocol):
    """One test per specimen."""

    name = "individual"

    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        ptr, members = singles(np.arange(tester.n))
        return tester.outcome(tester.read_round(ptr, members))

    def expected(self, n, prevalence, assay):
        from ...design.closed_form import individual_expected
        out = individual_expected(prevalence, assay).to_dict()
        out["source"] = "Se(1, 1) and Sp of the assay"
        return out
