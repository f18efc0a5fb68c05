"""The E-step: each specimen's posterior probability of being positive given the readouts, with
its prior set to the current fitted risk, and the marginal log-likelihood of the readouts.

:class:`ExactEStep` enumerates every group of specimens linked through read pools
(:func:`bayespool.decoders.exact.decode_exact`): the marginals and log P(readouts | beta) are exact,
so EM climbs the exact marginal likelihood (Vansteelandt, Goetghebeur & Verstraeten 2000,
Biometrics 56, 1126-1133; Xie 2001, Statistics in Medicine 20, 1957-1969). The per-pool likelihood
vectors and the groups are computed once; each step only changes the priors.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from ...decoders.exact import EXACT_LIMIT, decode_exact
from ...decoders.graph import components


class ExactEStep:
    """Exact posterior marginals and log evidence of a run for given per-specimen priors."""

    def __init__(self, run, assay):
        self.run = run
        self.lik_ptr, self.loglik = run.log_likelihood(assay)
        self.comps = components(run)

    @property
    def largest_group(self) -> int:
        return int(self.comps.sizes.max()) if self.comps.n_components else 0

    def feasible(self) -> bool:
        return self.largest_group <= EXACT_LIMIT

    def __call__(self, prior: np.ndarray):
        """(posterior probabilities, log P(readouts))."""
        run = dataclasses.replace(self.run, prior=np.asarray(prior, dtype=float))
        prob, log_z, _, _ = decode_exact(run, self.lik_ptr, self.loglik, self.comps)
        return prob, float(log_z.sum())
