"""Noiseless decoding of one round of a non-adaptive design.

With an error-free test every member of a negative pool is negative; the specimens left are called
positive. For a d-disjunct design and at most d positives this recovers the positives exactly:
each negative specimen has a pool that no positive covers (Kautz & Singleton 1964; the "COMP" rule in
Aldridge, Johnson & Scarlett 2019).
"""
from __future__ import annotations

import numpy as np

from .base import Design


def pool_mask(design: Design, positive_pools) -> np.ndarray:
    """Bool (n_pools,) from the pools that read positive (a bool mask over pools, or indices)."""
    mask = np.zeros(design.n_pools, dtype=bool)
    pools = np.asarray(positive_pools)
    if pools.dtype == bool:
        mask[:] = pools
    else:
        mask[pools.astype(np.int64)] = True
    return mask


def noiseless_decode(design: Design, positive_pools) -> np.ndarray:
    """Boolean calls (n,) from the pools that read positive (bool mask over pools, or indices)."""
    mask = pool_mask(design, positive_pools)
    negative_members = design.pool_members[np.repeat(~mask, design.pool_size)]
    calls = np.ones(design.n_samples, dtype=bool)
    calls[negative_members] = False
    return calls


def pool_results(design: Design, truth) -> np.ndarray:
    """Error-free readouts (True = positive) of every pool for a status vector."""
    truth = np.asarray(truth, dtype=bool)
    hits = truth[design.pool_members].astype(np.int64)
    sizes = design.pool_size
    owner = np.repeat(np.arange(design.n_pools), sizes)
    return np.bincount(owner, weights=hits, minlength=design.n_pools) > 0
