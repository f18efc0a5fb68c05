"""Metropolis-Hastings move that swaps the statuses of a positive and a negative member of one pool.

When a positive pool has two candidates and the assay is nearly perfect, single-site updates stick:
going from (1, 0) to (0, 1) passes through (0, 0) or (1, 1), both of tiny probability. The swap
keeps the pool's count d_t, so its own likelihood cancels and only the two specimens' priors and
other pools enter the ratio. Proposal: a uniform positive member and a uniform negative member of
pool t; the reverse swap has the same probability 1 / (d_t (k_t - d_t)), so the proposal is
symmetric (Metropolis et al. (1953); Hastings (1970), Biometrika 57(1)).
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .rng import below, uniform
from .state import set_count


@njit(cache=True)
def _shares(s, j, sample_ptr, sample_pools):
    """Is pool s one of specimen j's pools?"""
    for b in range(sample_ptr[j], sample_ptr[j + 1]):
        if sample_pools[b] == s:
            return True
    return False


@njit(cache=True)
def _log_ratio(i, j, sample_ptr, sample_pools, cur):
    """Log-likelihood change of x_i: 1 -> 0 with x_j: 0 -> 1, from the cached per-pool terms.

    A pool holding both keeps its count and contributes nothing (pool t itself among them).
    """
    dl = 0.0
    for b in range(sample_ptr[i], sample_ptr[i + 1]):
        s = sample_pools[b]
        if not _shares(s, j, sample_ptr, sample_pools):
            dl -= cur[s, 1]
    for b in range(sample_ptr[j], sample_ptr[j + 1]):
        s = sample_pools[b]
        if not _shares(s, i, sample_ptr, sample_pools):
            dl += cur[s, 0]
    return dl


@njit(cache=True)
def _shift_counts(i, step, sample_ptr, sample_pools, lik_ptr, delta, d, cur):
    """Move the counts of i's pools by ``step`` (+1 or -1)."""
    for b in range(sample_ptr[i], sample_ptr[i + 1]):
        t = sample_pools[b]
        set_count(t, d[t] + step, lik_ptr, delta, d, cur)


@njit(cache=True)
def swap_sweep(pools, rounds, pool_ptr, pool_members, sample_ptr, sample_pools, lik_ptr, delta,
               base_logit, x, d, cur, rng, tally):
    """``rounds`` swap proposals in each pool of ``pools``; tally[0] += proposed, tally[1] += accepted."""
    for a in range(len(pools)):
        t = pools[a]
        k = pool_ptr[t + 1] - pool_ptr[t]
        for _ in range(rounds):
            dt = d[t]
            if dt == 0 or dt == k:
                break
            want_pos = below(rng, dt)
            want_neg = below(rng, k - dt)
            i = -1
            j = -1
            seen_pos = 0
            seen_neg = 0
            for b in range(pool_ptr[t], pool_ptr[t + 1]):
                s = pool_members[b]
                if x[s] == 1:
                    if seen_pos == want_pos:
                        i = s
                    seen_pos += 1
                else:
                    if seen_neg == want_neg:
                        j = s
                    seen_neg += 1
            log_ratio = base_logit[j] - base_logit[i] + _log_ratio(i, j, sample_ptr,
                                                                   sample_pools, cur)
            tally[0] += 1
            if log_ratio >= 0.0 or uniform(rng) < np.exp(log_ratio):
                x[i] = 0
                x[j] = 1
                _shift_counts(i, -1, sample_ptr, sample_pools, lik_ptr, delta, d, cur)
                _shift_counts(j, 1, sample_ptr, sample_pools, lik_ptr, delta, d, cur)
                tally[1] += 1


class PoolSwapMove:
    """Swap a positive and a negative member of each positive pool, ``rounds`` times per sweep."""

    name = "pool-swap"

    def __init__(self, rounds: int = 1):
        if int(rounds) < 1:
            raise ValueError("rounds must be at least 1")
        self.rounds = int(rounds)

    def __repr__(self) -> str:
        return f"PoolSwapMove(rounds={self.rounds})"
