"""Microplates: well names, the 96- and 384-well formats, and specimens placed on plates.

A well is a row letter and a column number (``A1``, ``b07``, ``P24``). The two standard formats are
8 x 12 (96 wells) and 16 x 24 (384 wells), the ANSI/SLAS 1-2004 footprints (common practice).
:func:`plate_positions` reads the ``plate`` and ``well`` columns of a samples table into 0-based
rows and columns, refusing a well outside a 384-well plate or two specimens in one well.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .errors import InputError

WELL = re.compile(r"^\s*([A-Za-z])\s*0*([1-9][0-9]?)\s*$")
FORMATS = {96: (8, 12), 384: (16, 24)}


def parse_well(value) -> tuple[int, int] | None:
    """0-based (row, column) of a well name such as ``A1`` or ``h12``; None if it is not one."""
    m = WELL.match(str(value))
    if not m:
        return None
    return ord(m.group(1).upper()) - ord("A"), int(m.group(2)) - 1


def well_name(row: int, col: int) -> str:
    """``A1`` for (0, 0)."""
    return f"{chr(ord('A') + int(row))}{int(col) + 1}"


def plate_format(rows, cols) -> int | None:
    """96 or 384 for the smallest standard plate holding wells at these 0-based rows and columns."""
    for wells, (n_rows, n_cols) in FORMATS.items():
        if max(rows) < n_rows and max(cols) < n_cols:
            return wells
    return None


def check_plate_size(value, name: str = "plate_size") -> int:
    try:
        size = int(value)
    except (TypeError, ValueError):
        size = None
    if size not in FORMATS:
        raise InputError(f"{name} must be 96 or 384, got {value!r}")
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


def plate_positions(table: pd.DataFrame, ids, where: str = "samples") -> Positions | None:
    """Positions from a table with ``well`` (and optionally ``plate``) columns, one row per
    specimen in ``ids`` order; None without a ``well`` column. A malformed well, a well outside a
    384-well plate and two specimens in one well are errors naming the specimens."""
    if table is None or "well" not in table.columns:
        return None
    n = len(ids)
    plate = (table["plate"].astype(str).str.strip().to_numpy(dtype=object)
             if "plate" in table.columns else np.full(n, "", dtype=object))
    row = np.full(n, -1, dtype=np.int64)
    col = np.full(n, -1, dtype=np.int64)
    missing = np.zeros(n, dtype=bool)
    for i, value in enumerate(table["well"].astype(str).tolist()):
        if value.strip() == "":
            missing[i] = True
            continue
        pos = parse_well(value)
        if pos is None:
            raise InputError(f"{where}: well {value!r} of {ids[i]!r} is not a row letter and a "
                             "column number")
        if pos[0] >= FORMATS[384][0] or pos[1] >= FORMATS[384][1]:
            raise InputError(f"{where}: well {value} of {ids[i]!r} is outside a 384-well plate")
        row[i], col[i] = pos
    seen = {}
    for i in np.flatnonzero(~missing):
        key = (plate[i], row[i], col[i])
        if key in seen:
            where_plate = f" of plate {plate[i]!r}" if plate[i] else ""
            raise InputError(f"{where}: {ids[seen[key]]!r} and {ids[i]!r} are both in well "
                             f"{well_name(row[i], col[i])}{where_plate}")
        seen[key] = i
    fmt = {}
    for name in dict.fromkeys(plate[~missing].tolist()):
        on = (plate == name) & ~missing
        fmt[name] = plate_format(row[on], col[on])
    return Positions(plate, row, col, fmt, missing)
