"""Wells of a microplate: names such as ``A1`` or ``h12``, the 96- and 384-well formats, and the
check that the samples file puts every specimen in a real well of its own.

A well is a row letter and a column number (``A1``, ``B07``, ``P24``); a plate whose wells all fit
8 x 12 is a 96-well plate, otherwise a 384-well plate (16 x 24), the two standard microplate
formats (ANSI/SLAS 1-2004 footprint, common practice).
"""
from __future__ import annotations

import re

import numpy as np

WELL = re.compile(r"^\s*([A-Za-z])\s*0*([1-9][0-9]?)\s*$")
FORMATS = {96: (8, 12), 384: (16, 24)}
LARGEST = FORMATS[384]


def parse_well(value) -> tuple[int, int] | None:
    """0-based (row, column) of a well name such as ``A1`` or ``h12``; None if it is not one."""
    m = WELL.match(str(value))
    if not m:
        return None
    return ord(m.group(1).upper()) - ord("A"), int(m.group(2)) - 1


def plate_format(rows, cols) -> int | None:
    """96 or 384 for the smallest standard plate holding wells at these 0-based rows and columns."""
    for wells, (n_rows, n_cols) in FORMATS.items():
        if max(rows) < n_rows and max(cols) < n_cols:
            return wells
    return None


def check_wells(table) -> None:
    """Refuse a samples table whose ``well`` column names no real well (a row letter A-P and a
    column 1-24) or gives one well of a plate to two specimens; the error names the file, line and
    column. Blank wells are allowed (the specimen is on no plate map)."""
    if "well" not in table.frame.columns:
        return
    wells = table.frame["well"].astype(str).str.strip()
    plates = (table.frame["plate"].astype(str).str.strip() if "plate" in table.frame.columns
              else None)
    taken: dict = {}
    for r in np.flatnonzero((wells != "").to_numpy()).tolist():
        name = wells.iat[r]
        pos = parse_well(name)
        if pos is None:
            raise table.error(f"well {name!r} is not a row letter and a column number such as "
                              "A1 or H12", r, "well")
        if pos[0] >= LARGEST[0] or pos[1] >= LARGEST[1]:
            raise table.error(f"well {name!r} is outside the plate (a 384-well plate has rows A "
                              "to P and columns 1 to 24)", r, "well")
        key = ("" if plates is None else plates.iat[r], pos)
        if key in taken:
            first = taken[key]
            on = f" of plate {key[0]!r}" if key[0] else ""
            raise table.error(f"well {name!r}{on} is already given to sample "
                              f"{table.frame['sample'].iat[first]!r} (line "
                              f"{table.line_of(first)}); each specimen needs its own well",
                              r, "well")
        taken[key] = r
