"""The state of several chains: statuses, per-pool positive counts, prevalence, random streams.

Chains start from spread points so that R-hat can see a chain that is stuck: the first from all
negative, the second from every member of a positive pool positive, the rest from random statuses at
rates spread between the prior and one half.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from numba import njit

from .model import GibbsModel
from .rng import seed_states


@njit(cache=True, inline="always")
def set_count(t, value, lik_ptr, delta, d, cur):
    """Set pool t's positive count and its cached log-odds terms.

    ``cur[t, 0]`` is what pool t adds to the log-odds of a negative member (count of the others
    = d_t), ``cur[t, 1]`` that of a positive member (d_t - 1): one load per pool in an update.
    """
    d[t] = value
    cur[t, 0] = delta[lik_ptr[t] + value]
    cur[t, 1] = delta[lik_ptr[t] + value - 1] if value > 0 else 0.0


def cached_terms(model: GibbsModel, d: np.ndarray) -> np.ndarray:
    """``cur`` of :func:`set_count` for counts d (chains, pools), float32."""
    start = model.lik_ptr[:-1]
    cur = np.zeros(d.shape + (2,), dtype=np.float32)
    cur[..., 0] = model.delta[start + d]
    cur[..., 1] = np.where(d > 0, model.delta[start + np.maximum(d - 1, 0)], 0.0)
    return cur


@dataclass
class ChainState:
    """Arrays (one row per chain) that the kernels update in place."""

    x: np.ndarray           # uint8 (chains, sampled specimens in sweep order)
    d: np.ndarray           # int32 (chains, n_pools): positive members of each pool
    cur: np.ndarray         # float32 (chains, n_pools, 2): cached log-odds terms (set_count)
    total: np.ndarray       # int64 (chains,): positives among the sampled specimens
    logit_shift: np.ndarray  # float64 (chains,): logit of the shared prevalence, else 0
    prevalence: np.ndarray  # float64 (chains,): the shared prevalence, NaN when priors are fixed
    rng: np.ndarray         # uint64 (chains, 2)

    @property
    def n_chains(self) -> int:
        return len(self.x)

    @classmethod
    def spread(cls, model: GibbsModel, run, n_chains: int, rng: np.random.Generator,
               prevalence_prior=None, start=None) -> "ChainState":
        """Over-dispersed starts: all negative, every pool's positive member, then states between
        the prior and one half. ``start`` (P(x_i = 1) per specimen of the run, e.g. belief
        propagation's marginals) replaces the all-negative start by a draw from it."""
        m = model.n_sampled
        x = np.zeros((n_chains, m), dtype=np.uint8)
        prior = run.prior[model.order]
        for c in range(n_chains):
            if c == 0 and start is not None:
                x[c] = rng.random(m) < np.asarray(start, dtype=float)[model.order]
            elif c == 1:
                x[c] = model.positive_member
            elif c >= 2:
                frac = (c - 1) / (n_chains - 1)  # in (0, 1]
                rate = np.exp(np.log(prior) * (1 - frac) + np.log(0.5) * frac)
                x[c] = rng.random(m) < rate
        d = np.stack([model.pool_counts(x[c]) for c in range(n_chains)]) if n_chains else \
            np.zeros((0, model.n_pools), np.int32)
        total = x.sum(axis=1).astype(np.int64)
        if prevalence_prior is None:
            prev = np.full(n_chains, np.nan)
            shift = np.zeros(n_chains)
        else:
            a, b = prevalence_prior
            prev = rng.beta(a, b, size=n_chains).clip(1e-12, 1 - 1e-12)
            shift = np.log(prev) - np.log1p(-prev)
        d = d.astype(np.int32)
        return cls(x, d, cached_terms(model, d), total, shift, prev, seed_states(rng, n_chains))
