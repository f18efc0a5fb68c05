"""Exact joint distributions of the calls' error counts in small linked groups.

For a group of m specimens with calls, the Gray-code walk of :mod:`bayespool.decoders.exact` gives
every state's log weight; summing them by (positives among negative calls, positives among the
other specimens) and by positives among positive calls gives the exact joint distributions that
:mod:`bayespool.decisions` convolves across groups into what the batch can expect.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .exact import _component_log_weights


@njit(cache=True)
def _popcount(x):
    c = 0
    while x:
        x &= x - 1
        c += 1
    return c


@njit(cache=True)
def component_counts(comp_list, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools,
                      lik_ptr, loglik, log_p, log_q, codes, out_ptr, out2d, b_ptr, out_b):
    """Per component: the joint distribution of (positives among negative calls, positives among
    the rest) as a flat (na + 1) x (nr + 1) block, and of positives among positive calls."""
    n_pools = len(lik_ptr) - 1
    d = np.zeros(n_pools, dtype=np.int32)
    is_read = np.zeros(n_pools, dtype=np.bool_)
    for ci in range(len(comp_list)):
        c = comp_list[ci]
        s0, m, lw = _component_log_weights(c, csptr, csamples, cpptr, cpools, sample_ptr,
                                           sample_pools, lik_ptr, loglik, log_p, log_q, d,
                                           is_read)
        neg_mask = np.int64(0)
        pos_mask = np.int64(0)
        for b in range(m):
            code = codes[csamples[s0 + b]]
            if code == 0:
                neg_mask |= np.int64(1) << b
            elif code == 2:
                pos_mask |= np.int64(1) << b
        na = _popcount(neg_mask)
        nr = m - na
        top = lw.max()
        z = 0.0
        base = out_ptr[ci]
        for g in range(len(lw)):
            if lw[g] == -np.inf:
                continue
            w = np.exp(lw[g] - top)
            z += w
            state = g ^ (g >> 1)
            a = _popcount(state & neg_mask)
            out2d[base + a * (nr + 1) + (_popcount(state) - a)] += w
            out_b[b_ptr[ci] + _popcount(state & pos_mask)] += w
        for j in range(out_ptr[ci], out_ptr[ci + 1]):
            out2d[j] /= z
        for j in range(b_ptr[ci], b_ptr[ci + 1]):
            out_b[j] /= z
