"""Compressed sparse rows: the one container for every list of lists in bayespool.

Row ``r`` holds ``indices[ptr[r]:ptr[r+1]]``; ``ptr`` is int64 (memberships can pass 2^31), the
indices int32 or int64. A run keeps its pools' members and its specimens' pools this way, a design
its pools, the decoders' components their specimens and read pools, the planner its candidates and
the plan its new pools. Memory is linear in the number of entries; nothing is dense.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

_COUNTING_SORT_FROM = 1 << 16  # pairs; below this a NumPy sort is as fast and needs no numba


def csr(rows: np.ndarray, cols: np.ndarray, n_rows: int):
    """CSR (ptr, indices) of the pairs (rows[i], cols[i]), stable in input order within a row.

    Large inputs take an O(n) counting sort (numba) instead of an O(n log n) stable argsort.
    """
    ptr = np.zeros(n_rows + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=n_rows), out=ptr[1:])
    if len(rows) < _COUNTING_SORT_FROM:
        order = np.argsort(rows, kind="stable")
        return ptr, cols[order].astype(np.int32, copy=False)
    from .incidence import scatter_rows
    out = np.empty(len(rows), dtype=np.int32)
    scatter_rows(np.asarray(rows), np.asarray(cols), ptr, out)
    return ptr, out


@dataclass(frozen=True, eq=False)
class CSR:
    """Rows of indices: row ``r`` is ``indices[ptr[r]:ptr[r+1]]``."""

    ptr: np.ndarray
    indices: np.ndarray

    @classmethod
    def from_pairs(cls, rows, cols, n_rows: int) -> "CSR":
        """The pairs (rows[i], cols[i]) grouped by row, in input order within a row (int32
        indices)."""
        return cls(*csr(np.asarray(rows, dtype=np.int64), np.asarray(cols), n_rows))

    @classmethod
    def from_rows(cls, rows, dtype=np.int64) -> "CSR":
        """From a sequence of index arrays, one per row."""
        rows = [np.asarray(r, dtype=dtype) for r in rows]
        ptr = np.zeros(len(rows) + 1, dtype=np.int64)
        np.cumsum([len(r) for r in rows], out=ptr[1:])
        return cls(ptr, np.concatenate(rows) if rows else np.zeros(0, dtype=dtype))

    @property
    def n_rows(self) -> int:
        return len(self.ptr) - 1

    def __len__(self) -> int:
        return self.n_rows

    @property
    def n_entries(self) -> int:
        return len(self.indices)

    @property
    def sizes(self) -> np.ndarray:
        """Entries per row (int64)."""
        return np.diff(self.ptr).astype(np.int64, copy=False)

    def row(self, r: int) -> np.ndarray:
        return self.indices[self.ptr[r]:self.ptr[r + 1]]

    def owner(self) -> np.ndarray:
        """The row of every entry, in entry order (int64)."""
        return np.repeat(np.arange(self.n_rows, dtype=np.int64), self.sizes)

    def transpose(self, n_cols: int) -> "CSR":
        """Rows indexed by column: row c lists the rows that hold c, in row order."""
        return CSR.from_pairs(self.indices.astype(np.int64), self.owner(), n_cols)

    def take(self, rows) -> "CSR":
        """The listed rows, in that order."""
        return CSR.from_rows([self.row(int(r)) for r in rows], dtype=self.indices.dtype)


class CSRPart:
    """A read-only attribute naming one array of a CSR field, so code and kernels keep their plain
    arrays: ``pool_ptr = CSRPart("by_pool", "ptr")`` reads ``self.by_pool.ptr``."""

    def __init__(self, field: str, part: str):
        self.field, self.part = field, part

    def __get__(self, obj, owner=None):
        return self if obj is None else getattr(getattr(obj, self.field), self.part)
