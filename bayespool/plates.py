"""Specimens placed on plates: positions, pipetting orders, well names.

Well names and the 96/384 formats are :mod:`bayespool.wells`; :func:`plate_positions` reads the
``plate`` and ``well`` columns of a samples table (checked there: real wells, one specimen each) into
0-based rows and columns; :func:`fill_order` walks a plate as a multichannel pipette does.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .wells import FORMATS, check_wells, parse_well, plate_format  # noqa: F401 (re-exported)

def well_name(row: int, col: int) -> str:
    """``A1`` for (0, 0)."""
    return f"{chr(ord('A') + int(row))}{int(col) + 1}"


def check_plate_size(value, name: str = "plate_size") -> int:
    try:
        size = int(value)
    except (TypeError, ValueError):
        size = None
    if size not in FORMATS:
        raise InputError(f"`{name}` must be 96 or 384, got {value!r}")
    return size


def fill_order(size: int, fill: str = "columns") -> list[tuple[int, int]]:
    """Every well of a plate in pipetting order: down the columns (A1, B1, ..., H1, A2, ...) or
    along the rows (A1, A2, ..., A12, B1, ...)."""
    n_rows, n_cols = FORMATS[check_plate_size(size)]
    if fill == "columns":
        return [(r, c) for c in range(n_cols) for r in range(n_rows)]
    if fill == "rows":
        return [(r, c) for r in range(n_rows) for c in range(n_cols)]
    raise InputError(f"fill must be 'rows' or 'columns', got {fill!r}")


@dataclass
class Positions:
    """Where each specimen sits: plate name ('' without a plate column), 0-based row and column,
    the plate's format (96 or 384), and which specimens have no well (``missing``)."""

    plate: np.ndarray      # object (n,)
    row: np.ndarray        # int64 (n,), -1 without a well
    col: np.ndarray        # int64 (n,)
    format: dict           # plate name -> 96 | 384
    missing: np.ndarray    # bool (n,)

    def well(self, i: int) -> str:
        return "" if self.missing[i] else well_name(self.row[i], self.col[i])

    def plates(self) -> list:
        """Plate names in the order they first appear."""
        return list(dict.fromkeys(self.plate[~self.missing].tolist()))


def plate_positions(table, ids, where: str = "samples") -> Positions | None:
    """Positions from a samples table with ``well`` (and optionally ``plate``) columns, one row per
    specimen in ``ids`` order; None without a ``well`` column. ``table`` is a
    :class:`bayespool.io.Table` (errors name file, line and column) or a DataFrame (errors name the
    row); wells are checked by :func:`bayespool.wells.check_wells`."""
    from .io import FrameTable, Table
    if table is None:
        return None
    if not isinstance(table, Table):
        if "well" not in table.columns:
            return None
        table = FrameTable(table, f"<{where}>", ["sample"], where)
    f = table.frame
    if "well" not in f.columns:
        return None
    check_wells(table)
    n = len(ids)
    plate = (f["plate"].astype(str).str.strip().to_numpy(dtype=object)
             if "plate" in f.columns else np.full(n, "", dtype=object))
    row = np.full(n, -1, dtype=np.int64)
    col = np.full(n, -1, dtype=np.int64)
    missing = np.zeros(n, dtype=bool)
    for i, value in enumerate(f["well"].astype(str).tolist()):
        pos = parse_well(value)
        if pos is None:
            missing[i] = True
        else:
            row[i], col[i] = pos
    fmt = {}
    for name in dict.fromkeys(plate[~missing].tolist()):
        on = (plate == name) & ~missing
        fmt[name] = plate_format(row[on], col[on])
    return Positions(plate, row, col, fmt, missing)
