"""Numba kernel behind :func:`bayespool.run.csr`: a counting sort of membership pairs.

Kept apart from run.py so that only runs large enough to profit import numba for it.
"""
from __future__ import annotations

from numba import njit


@njit(cache=True)
def scatter_rows(rows, cols, ptr, out):
    """out[ptr[r]:ptr[r+1]] = cols of the pairs in row r, in input order (a stable counting sort)."""
    fill = ptr[:-1].copy()
    for a in range(len(rows)):
        r = rows[a]
        out[fill[r]] = cols[a]
        fill[r] += 1
