"""Exact joint posterior draws for small connected components, by enumerating their states.

The planner needs joint draws of the statuses, not only marginals: within a positive pool the
members are negatively correlated ("exactly one of them is positive"), and the value of a split
depends on it. For a component of m specimens it takes the log weight of every state from the
Gray-code walk of :mod:`bayespool.decoders.exact` and draws states by inverse transform on the
cumulative weights. Hard constraints (Se or Sp of 1) are log 0: such states get
weight zero, never NaN.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .exact import EXACT_LIMIT, _component_log_weights, impossible


@njit(cache=True)
def _sample_components(comp_list, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools,
                       lik_ptr, loglik, log_p, log_q, uniforms, out, ok):
    """Fill out[i, :] (specimens x draws) for every specimen of the listed components."""
    n_draws = uniforms.shape[1]
    d = np.zeros(len(lik_ptr) - 1, dtype=np.int32)
    is_read = np.zeros(len(lik_ptr) - 1, dtype=np.bool_)
    for ci in range(len(comp_list)):
        c = comp_list[ci]
        s0, m, lw = _component_log_weights(c, csptr, csamples, cpptr, cpools, sample_ptr,
                                           sample_pools, lik_ptr, loglik, log_p, log_q, d,
                                           is_read)
        n_states = len(lw)
        top = lw.max()
        if top == -np.inf:
            ok[ci] = False
            continue
        cdf = np.empty(n_states)
        acc = 0.0
        for g in range(n_states):
            acc += np.exp(lw[g] - top)
            cdf[g] = acc
        for r in range(n_draws):
            u = uniforms[ci, r] * acc
            g = np.searchsorted(cdf, u, side="right")
            if g >= n_states:  # u < acc, so only by rounding
                g = n_states - 1
            mask = g ^ (g >> 1)
            for b in range(m):
                out[csamples[s0 + b], r] = (mask >> b) & 1


def sample_exact(run, lik_ptr, loglik, comps, selected, n_draws: int, rng,
                 limit: int = EXACT_LIMIT) -> np.ndarray:
    """Exact joint posterior draws of the specimens of the selected components.

    Returns ``out`` of shape (n_samples, n_draws), uint8, filled for the specimens of the selected
    components (other rows are zero). Components are sampled independently of each other, as the
    posterior factorises over them.
    """
    selected = np.asarray(selected, dtype=np.int64)
    if len(selected) and comps.sizes[selected].max() > limit:
        raise ValueError(f"component above the sampling limit of {limit} specimens")
    out = np.zeros((run.n_samples, n_draws), dtype=np.uint8)
    if not len(selected):
        return out
    prior = run.prior
    uniforms = rng.random((len(selected), n_draws))
    ok = np.ones(len(selected), dtype=np.bool_)
    _sample_components(selected, comps.sample_ptr, comps.samples, comps.pool_ptr, comps.pools,
                       run.sample_ptr, run.sample_pools, lik_ptr, loglik, np.log(prior),
                       np.log1p(-prior), uniforms, out, ok)
    if not ok.all():
        raise impossible(run, comps.pools_of(int(selected[np.flatnonzero(~ok)[0]])))
    return out
