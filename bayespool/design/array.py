"""Array designs: specimens on r x c grids; every row and every column of a grid is a pool.

Each specimen is in two pools (its row and its column) and two specimens share at most one, so an
array is 1-disjunct: without test error a single positive sits at the crossing of the one positive row
and the one positive column (Phatarfod & Sudbury 1994, The use of a square array scheme in blood
testing, Statistics in Medicine 13; Kim et al. 2007, Biometrics 63(4)). Specimens fill the grids row
by row in the order given; more specimens than one grid holds use further grids. Specimens on plates
use the plates' rows and columns (:mod:`bayespool.design.plate_layout`).
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .base import (Design, build_design, check_count, check_max_pool_size,
                   guaranteed_disjunct)
from .specimens import specimens

PLATE_ROWS, PLATE_COLS = 8, 12   # a 96-well plate (common practice)


def default_grid(n: int, max_pool_size: int | None = None) -> tuple[int, int]:
    """A 96-well plate's 8 x 12 when the specimens fill one, else the smallest near-square grid."""
    if n >= PLATE_ROWS * PLATE_COLS:
        rows, cols = PLATE_ROWS, PLATE_COLS
    else:
        rows = max(1, math.isqrt(n - 1) + 1 if n > 1 else 1)
        cols = max(1, math.ceil(n / rows))
        rows = max(1, math.ceil(n / cols))
    if max_pool_size is not None:
        rows, cols = min(rows, max_pool_size), min(cols, max_pool_size)
    return rows, cols


def grid_positions(n: int, rows: int, cols: int):
    """(grid, row, column) of each specimen, filling grids row by row."""
    idx = np.arange(n, dtype=np.int64)
    grid, cell = np.divmod(idx, rows * cols)
    row, col = np.divmod(cell, cols)
    return grid, row, col


def array_pools(n: int, rows: int, cols: int):
    """CSR pools (grid g: rows first, then columns) and their IDs; empty rows/columns dropped."""
    grid, row, col = grid_positions(n, rows, cols)
    per_grid = rows + cols
    owner = np.concatenate([grid * per_grid + row, grid * per_grid + rows + col])
    member = np.concatenate([np.arange(n), np.arange(n)]).astype(np.int32)
    n_grids = int(grid.max()) + 1 if n else 0
    n_pools = n_grids * per_grid
    order = np.argsort(owner, kind="stable")
    ptr = np.zeros(n_pools + 1, dtype=np.int64)
    np.cumsum(np.bincount(owner, minlength=n_pools), out=ptr[1:])
    width = len(str(max(rows, cols)))
    labels = []
    for g in range(n_grids):
        prefix = f"G{g + 1}-" if n_grids > 1 else ""
        labels += [f"{prefix}R{r + 1:0{width}d}" for r in range(rows)]
        labels += [f"{prefix}C{c + 1:0{width}d}" for c in range(cols)]
    return ptr, member[order], np.array(labels, dtype=object), n_grids


def array_design(samples, rows: int | None = None, cols: int | None = None,
                 max_pool_size: int | None = None) -> Design:
    """Row and column pools of r x c grids (default: see :func:`default_grid`).

    Specimens with plates and wells (a samples file with ``well``) use their plates' own rows and
    columns instead (:func:`bayespool.design.plate_layout.plate_array_design`).
    """
    spec = specimens(samples)
    n = len(spec)
    limit = check_max_pool_size(max_pool_size)
    pos = spec.positions()
    if pos is not None:
        from .plate_layout import plate_array_design
        return plate_array_design(spec, pos, rows, cols, limit)
    if rows is None and cols is None:
        rows, cols = default_grid(n, limit)
    elif rows is None or cols is None:
        given = check_count(rows if rows is not None else cols,
                            "rows" if rows is not None else "cols")
        other = max(1, math.ceil(min(n, PLATE_ROWS * PLATE_COLS) / given))
        if limit is not None:
            other = min(other, limit)
        rows, cols = (given, other) if rows is not None else (other, given)
    rows, cols = check_count(rows, "rows"), check_count(cols, "cols")
    if limit is not None and max(rows, cols) > limit:
        raise InputError(f"a {rows} x {cols} grid makes pools of {max(rows, cols)} specimens, "
                         f"above max_pool_size {limit}", parameters=("max_pool_size",))
    ptr, members, labels, n_grids = array_pools(n, rows, cols)
    notes = []
    if n % (rows * cols):
        notes.append(f"the last grid holds {n % (rows * cols)} of {rows * cols} specimens")
    return build_design("array", spec.ids, labels, ptr, members,
                        parameters={"rows": rows, "cols": cols, "grids": n_grids}, notes=notes,
                        overlap=1 if n > 1 else 0,
                        disjunct=guaranteed_disjunct(1 if n > 1 else 0, 2, n),
                        max_pool_size=limit)
