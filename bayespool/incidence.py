"""Numba kernels behind :mod:`bayespool.run` for large layouts: a counting sort of membership
pairs into CSR, and the search for a repeated (pool, sample) pair.

Kept apart from run.py so that only runs large enough to profit import numba for them.
"""
from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def scatter_rows(rows, cols, ptr, out):
    """out[ptr[r]:ptr[r+1]] = cols of the pairs in row r, in input order (a stable counting sort)."""
    fill = ptr[:-1].copy()
    for a in range(len(rows)):
        r = rows[a]
        out[fill[r]] = cols[a]
        fill[r] += 1


@njit(cache=True)
def first_repeated_pair(rows, cols, ptr, n_cols):
    """Index of the first pair (rows[a], cols[a]), in input order, equal to an earlier one, or -1.

    The pair indices are counting-sorted by row (``ptr`` is that CSR's pointer array, stable in
    input order), then each row is walked with a last-seen marker per column: O(n), no hashing.
    """
    order = np.empty(len(rows), dtype=np.int64)
    fill = ptr[:-1].copy()
    for a in range(len(rows)):
        r = rows[a]
        order[fill[r]] = a
        fill[r] += 1
    seen = np.full(n_cols, -1, dtype=np.int64)
    first = -1
    for r in range(len(ptr) - 1):
        for b in range(ptr[r], ptr[r + 1]):
            a = order[b]
            c = cols[a]
            if seen[c] == r:
                if first < 0 or a < first:
                    first = a
            else:
                seen[c] = r
    return first
