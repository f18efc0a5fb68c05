"""The checks of a samples file shared by every reader of it (a run, a design's specimens).

Sample IDs non-empty and unique, wells well-formed (:func:`bayespool.wells.check_wells`), and the
optional ``prior`` column a probability strictly between 0 and 1; errors name file, line and column.
"""
from __future__ import annotations

import numpy as np

from .wells import check_wells


def check_samples(table):
    """Check a samples table (``sample`` column, optional ``prior``, ``plate``, ``well``).

    Returns ``(values, given)`` of the ``prior`` column (``given`` False where it is blank), or
    None when the file has no such column.
    """
    frame = table.frame
    blank = np.flatnonzero((frame["sample"] == "").to_numpy())
    if len(blank):
        raise table.error("empty sample ID", blank[0], "sample")
    dup = frame.duplicated(["sample"]).to_numpy()
    if dup.any():
        r = int(np.flatnonzero(dup)[0])
        raise table.error(f"sample {frame['sample'].iat[r]!r} is listed twice", r, "sample")
    check_wells(table)
    if "prior" not in frame.columns:
        return None
    vals, given = table.numbers("prior")
    bad = given & ~((vals > 0) & (vals < 1))
    if bad.any():
        r = int(np.flatnonzero(bad)[0])
        raise table.error(f"prior {frame['prior'].iat[r].strip()!r} must be a probability "
                          "strictly between 0 and 1", r, "prior")
    return vals, given
