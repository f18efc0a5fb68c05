"""Classic array testing: row and column pools of r x c grids, then the crossings alone.

Stage 1 reads every row and every column pool of every grid in one round. Stage 2 tests alone each
specimen whose row and column both read positive; in a grid where rows read positive but no column
does (or the reverse), every specimen of the positive rows (columns) is tested alone. Each stage-2
readout is that specimen's call; everyone else is negative. This is the two-dimensional array rule
without a master pool as described by Phatarfod & Sudbury (1994), Statistics in Medicine 13, and
Kim et al. (2007), Biometrics 63(4) (the one-sided case from memory). Without test error a single
positive on a full grid costs ``r + c + 1`` tests.
"""
from __future__ import annotations

import numpy as np

from ...design.array import PLATE_COLS, PLATE_ROWS, array_pools, grid_positions
from ...design.base import check_max_pool_size
from ...validation import check_count
from ...errors import InputError
from ..protocol import Outcome, Protocol, Tester, singles


class ArrayTesting(Protocol):
    """Rows and columns of r x c grids as pools; crossings of positive lines retested alone."""

    name = "array"

    def __init__(self, rows: int | None = None, cols: int | None = None,
                 max_pool_size: int | None = None):
        self.rows = check_count(PLATE_ROWS if rows is None else rows, "rows")
        self.cols = check_count(PLATE_COLS if cols is None else cols, "cols")
        limit = check_max_pool_size(max_pool_size)
        if limit is not None and max(self.rows, self.cols) > limit:
            raise InputError(f"a {self.rows} x {self.cols} grid makes pools of "
                             f"{max(self.rows, self.cols)} specimens, above max_pool_size {limit}",
                             parameters=("max_pool_size",))

    def parameters(self):
        return {"rows": self.rows, "cols": self.cols}

    def run(self, tester: Tester, prior: np.ndarray) -> Outcome:
        n, r, c = tester.n, self.rows, self.cols
        ptr, members, _, n_grids = array_pools(n, r, c)
        sizes = np.diff(ptr)
        used = np.flatnonzero(sizes > 0)  # the last grid may leave rows or columns empty
        read = np.zeros(len(sizes), dtype=bool)
        read[used] = tester.read_round(*_subset(ptr, members, used))
        line = read.reshape(n_grids, r + c)
        row_pos, col_pos = line[:, :r], line[:, r:]
        any_row, any_col = row_pos.any(axis=1), col_pos.any(axis=1)
        grid, row, col = grid_positions(n, r, c)
        rp, cp = row_pos[grid, row], col_pos[grid, col]
        retest = (rp & cp) | (rp & ~any_col[grid]) | (cp & ~any_row[grid])
        calls = np.zeros(n, dtype=bool)
        idx = np.flatnonzero(retest)
        if len(idx):
            calls[idx] = tester.read_round(*singles(idx))
        return tester.outcome(calls)


def _subset(ptr: np.ndarray, members: np.ndarray, pools: np.ndarray):
    """CSR of the chosen pools only."""
    sizes = np.diff(ptr)[pools]
    new_ptr = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    starts = np.repeat(ptr[pools] - new_ptr[:-1], sizes)
    return new_ptr, members[np.arange(new_ptr[-1]) + starts]
