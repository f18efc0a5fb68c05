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

from .exact import EXACT_LIMIT, ExactMemo, _component_log_weights, impossible


@njit(cache=True)
def _component_cdf(c, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools, lik_ptr, loglik,
                   log_p, log_q, d, is_read):
    """Cumulative weights of the states of component ``c`` in Gray-code order (relative to the
    largest; all zero when no state is possible)."""
    s0, m, lw = _component_log_weights(c, csptr, csamples, cpptr, cpools, sample_ptr,
                                       sample_pools, lik_ptr, loglik, log_p, log_q, d, is_read)
    n_states = len(lw)
    cdf = np.zeros(n_states)
    top = lw.max()
    if top == -np.inf:
        return cdf
    acc = 0.0
    for g in range(n_states):
        acc += np.exp(lw[g] - top)
        cdf[g] = acc
    return cdf


@njit(cache=True)
def _draw_states(cdf, own, uniforms, out):
    """Draw states by inverse transform: out[own[b], r] = bit b of the r-th drawn state."""
    n_states = len(cdf)
    acc = cdf[n_states - 1]
    for r in range(len(uniforms)):
        u = uniforms[r] * acc
        g = np.searchsorted(cdf, u, side="right")
        if g >= n_states:  # u < acc, so only by rounding
            g = n_states - 1
        mask = g ^ (g >> 1)
        for b in range(len(own)):
            out[own[b], r] = (mask >> b) & 1


@njit(cache=True)
def _sample_components(comp_list, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools,
                       lik_ptr, loglik, log_p, log_q, uniforms, out, ok):
    """Fill out[i, :] (specimens x draws) for every specimen of the listed components."""
    d = np.zeros(len(lik_ptr) - 1, dtype=np.int32)
    is_read = np.zeros(len(lik_ptr) - 1, dtype=np.bool_)
    for ci in range(len(comp_list)):
        c = comp_list[ci]
        cdf = _component_cdf(c, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools, lik_ptr,
                             loglik, log_p, log_q, d, is_read)
        if cdf[len(cdf) - 1] == 0.0:
            ok[ci] = False
            continue
        _draw_states(cdf, csamples[csptr[c]:csptr[c + 1]], uniforms[ci], out)


def _sample_remembered(memo: ExactMemo, selected, graph, uniforms, out, ok):
    """_sample_components with each component's cumulative weights taken from ``memo`` when it
    has met the component before (the same numbers, so the same draws)."""
    csptr, csamples = graph[0], graph[1]
    d = np.zeros(len(graph[6]) - 1, dtype=np.int32)
    is_read = np.zeros(len(d), dtype=np.bool_)
    for ci, key in enumerate(memo.keys(selected, graph)):
        c = int(selected[ci])
        cdf = memo.cdfs.get(key)
        if cdf is None:
            cdf = _component_cdf(c, *graph, d, is_read)
            memo.remember_cdf(key, cdf)
        if cdf[-1] == 0.0:
            ok[ci] = False
            continue
        _draw_states(cdf, csamples[csptr[c]:csptr[c + 1]], uniforms[ci], out)


def sample_exact(run, lik_ptr, loglik, comps, selected, n_draws: int, rng,
                 limit: int = EXACT_LIMIT, memo: ExactMemo | None = None) -> np.ndarray:
    """Exact joint posterior draws of the specimens of the selected components.

    Returns ``out`` of shape (n_samples, n_draws), uint8, filled for the specimens of the selected
    components (other rows are zero). Components are sampled independently of each other, as the
    posterior factorises over them. ``memo`` (see :class:`~bayespool.decoders.exact.ExactMemo`)
    spares the enumeration of components met before; the draws are the same.
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
    graph = (comps.sample_ptr, comps.samples, comps.pool_ptr, comps.pools, run.sample_ptr,
             run.sample_pools, lik_ptr, loglik, np.log(prior), np.log1p(-prior))
    if memo is None:
        _sample_components(selected, *graph, uniforms, out, ok)
    else:
        _sample_remembered(memo, selected, graph, uniforms, out, ok)
    if not ok.all():
        raise impossible(run, comps.pools_of(int(selected[np.flatnonzero(~ok)[0]])))
    return out
