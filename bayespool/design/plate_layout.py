"""Designs laid on the specimens' own plates, so every pool is a run of neighbouring wells.

When the samples file gives ``plate`` and ``well``, an array design uses the plate's rows and columns
(one 8 x 12 grid per 96-well plate, 16 x 24 per 384-well plate, or tiles of ``rows x cols`` laid on
the plate from A1), so a row pool is a plate row an 8- or 12-channel pipette takes in one move; and
Dorfman pools are consecutive wells in pipetting order, down the columns (A1, B1, ..., H1, A2, ...)
or along the rows, never across two plates. Empty wells are simply not in any pool.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..plates import FORMATS, Positions, well_name
from ..validation import check_count
from .base import Design, build_design, guaranteed_disjunct, pool_labels

FILLS = ("columns", "rows")


def require_wells(pos: Positions, ids, what: str) -> None:
    if pos.missing.any():
        bad = ids[pos.missing]
        more = f" and {len(bad) - 3} more" if len(bad) > 3 else ""
        raise InputError(f"{what} needs the well of every specimen; "
                         f"{', '.join(map(repr, bad[:3]))}{more} ha"
                         f"{'ve' if len(bad) > 1 else 's'} none")


def _plate_tag(name: str) -> str:
    return f"{name}-" if name else ""


def plate_array_design(spec, pos: Positions, rows: int | None = None, cols: int | None = None,
                       max_pool_size: int | None = None) -> Design:
    """Row and column pools of each plate (or of ``rows x cols`` tiles laid on each plate)."""
    ids = spec.ids
    require_wells(pos, ids, "an array design on plates")
    owner_lists, labels = [], []
    sizes_used = set()
    for plate in pos.plates():
        on = np.flatnonzero(pos.plate == plate)
        n_rows, n_cols = FORMATS[pos.format[plate] or 384]
        tr = n_rows if rows is None else check_count(rows, "rows")
        tc = n_cols if cols is None else check_count(cols, "cols")
        if tr > n_rows or tc > n_cols:
            raise InputError(f"a {tr} x {tc} grid does not fit the {n_rows} x {n_cols} plate "
                             f"{plate!r}")
        sizes_used.add((tr, tc))
        tiles_r, tiles_c = math.ceil(n_rows / tr), math.ceil(n_cols / tc)
        r, c = pos.row[on], pos.col[on]
        tile = (r // tr) * tiles_c + (c // tc)
        tiled = tiles_r * tiles_c > 1
        for t in np.unique(tile):
            here = on[tile == t]
            tag = _plate_tag(plate) + (f"T{int(t) + 1}-" if tiled else "")
            for rr in np.unique(pos.row[here]):
                owner_lists.append(here[pos.row[here] == rr])
                labels.append(f"{tag}row-{well_name(rr, 0)[0]}")
            for cc in np.unique(pos.col[here]):
                owner_lists.append(here[pos.col[here] == cc])
                labels.append(f"{tag}col-{int(cc) + 1:02d}")
    ptr = np.concatenate([[0], np.cumsum([len(m) for m in owner_lists])]).astype(np.int64)
    members = (np.concatenate(owner_lists) if owner_lists else np.zeros(0)).astype(np.int32)
    n = len(ids)
    grid = sorted(sizes_used)
    params = {"rows": grid[0][0], "cols": grid[0][1], "grids": "plates' own rows and columns"
              if rows is None and cols is None else "tiles on each plate",
              "plates": len(pos.plates())}
    notes = []
    if len(grid) > 1:
        notes.append("plates of different formats: grids of " +
                     ", ".join(f"{a} x {b}" for a, b in grid))
    return build_design("array", ids, np.array(labels, dtype=object), ptr, members,
                        parameters=params, notes=notes, overlap=1 if n > 1 else 0,
                        disjunct=guaranteed_disjunct(1 if n > 1 else 0, 2, n),
                        max_pool_size=max_pool_size)


def pipetting_order(pos: Positions, fill: str) -> np.ndarray:
    """Specimen indices plate by plate, wells in the given fill order."""
    if fill not in FILLS:
        raise InputError(f"`fill` must be rows or columns, got {fill!r}")
    plate_rank = {p: i for i, p in enumerate(pos.plates())}
    rank = np.array([plate_rank[p] for p in pos.plate], dtype=np.int64)
    first, second = (pos.col, pos.row) if fill == "columns" else (pos.row, pos.col)
    return np.lexsort((second, first, rank))


def plate_dorfman_design(spec, pos: Positions, pool_size: int, fill: str = "columns",
                         max_pool_size: int | None = None) -> Design:
    """Pools of ``pool_size`` neighbouring wells in pipetting order, never across plates."""
    ids = spec.ids
    require_wells(pos, ids, "a Dorfman design on plates")
    k = check_count(pool_size, "pool_size")
    order = pipetting_order(pos, fill)
    plate_of = pos.plate[order]
    blocks = []
    for plate in pos.plates():
        here = order[plate_of == plate]
        blocks += [here[s:s + k] for s in range(0, len(here), k)]
    ptr = np.concatenate([[0], np.cumsum([len(b) for b in blocks])]).astype(np.int64)
    members = np.concatenate(blocks).astype(np.int32)
    short = sum(1 for b in blocks if len(b) < k)
    notes = [f"{short} pool(s) hold fewer than {k} specimens (the end of a plate)"] if short else []
    n = len(ids)
    return build_design("dorfman", ids, pool_labels("D", len(blocks)), ptr, members,
                        parameters={"pool_size": k, "fill": fill, "plates": len(pos.plates())},
                        notes=notes, overlap=1 if k > 1 and n > 1 else 0,
                        disjunct=0 if k > 1 and n > 1 else max(n - 1, 0),
                        max_pool_size=max_pool_size)
