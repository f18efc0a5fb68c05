"""Pooled readouts for surveillance: one row per pool with its size, readout counts and groups.

Two sources give the same :class:`PooledData`:

- a pools file ``pool,size,result`` with one row per readout (several rows of one pool are
  replicates) and any extra columns, which are the grouping columns (site, week, ...);
- a run (layout, readouts and optionally samples): sizes from the layout, groups from the samples
  file, where every member of a pool must share the pool's group.

Every problem names the file, line and column.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError
from ..io import Table, read_table

__all__ = ["PooledData", "read_pools", "pools_from_frame", "pools_from_run"]

REQUIRED = ("pool", "size", "result")


@dataclass(eq=False)
class PooledData:
    """Per pool: ``pool`` (ID), ``size``, ``n_positive``, ``n_negative`` (readouts) and one string
    column per grouping variable in ``group_columns`` (the columns a grouping may use)."""

    frame: pd.DataFrame
    group_columns: list
    source: str | None = None
    notes: list = field(default_factory=list)
    table: Table | None = None   # the file the pools came from, for errors naming line and column

    def check_by(self, by) -> list:
        """The grouping columns, checked against the file's columns (matched in any case, as the
        file's headers are)."""
        by = [c.strip().lower() for c in ([by] if isinstance(by, str) else list(by or ()))
              if c.strip()]
        for c in by:
            if c not in self.group_columns:
                have = ", ".join(self.group_columns) or "none"
                if self.table is not None:
                    raise InputError(f"no column {c!r} to group by (grouping columns: {have})",
                                     self.source, 1, c)
                raise InputError(f"`by`: no column {c!r} to group by (grouping columns: {have})")
        if len(set(by)) != len(by):
            raise InputError(f"`by` names a column twice: {', '.join(by)}")
        return by

    def first_line_of(self, pool: str) -> int | None:
        if self.table is None:
            return None
        rows = np.flatnonzero((self.table.frame["pool"] == pool).to_numpy())
        return self.table.line_of(int(rows[0])) if len(rows) else None


def _sizes(table: Table) -> np.ndarray:
    raw = table.frame["size"]
    blank = (raw == "").to_numpy()
    if blank.any():
        r = int(np.flatnonzero(blank)[0])
        raise table.error(f"pool {table.frame['pool'].iat[r]!r} has no size", r, "size")
    vals = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
    with np.errstate(invalid="ignore"):
        bad = ~(np.isfinite(vals) & (vals >= 1) & (vals == np.round(vals)))
    if bad.any():
        r = int(np.flatnonzero(bad)[0])
        raise table.error(f"size {raw.iat[r]!r} is not a positive whole number", r, "size")
    return vals.astype(np.int64)


def _consistent(table: Table, codes: np.ndarray, values: np.ndarray, column: str) -> None:
    """Every row of one pool gives the same value in ``column``."""
    first = pd.Series(values).groupby(codes).transform("first").to_numpy()
    differ = first != values
    if differ.any():
        r = int(np.flatnonzero(differ)[0])
        pool = table.frame["pool"].iat[r]
        raise table.error(f"pool {pool!r} has {column} {values[r]!r} here but {first[r]!r} on "
                          "an earlier row", r, column)


def _from_table(table: Table) -> PooledData:
    from ..run import parse_results
    f = table.frame
    blank = (f["pool"] == "").to_numpy()
    if blank.any():
        r = int(np.flatnonzero(blank)[0])
        raise table.error("empty pool ID", r, "pool")
    sizes = _sizes(table)
    results = parse_results(table)
    codes, pool_ids = pd.factorize(f["pool"], sort=False)
    groups = [c for c in table.header if c not in REQUIRED and c != "ct"]
    _consistent(table, codes, sizes, "size")
    for c in groups:
        _consistent(table, codes, f[c].to_numpy(dtype=object), c)
    notes = []
    skipped = int((results < 0).sum())
    if skipped:
        msg = f"{skipped} invalid readout(s) skipped"
        warnings.warn(msg, stacklevel=3)
        notes.append(msg)
    n = len(pool_ids)
    first = np.full(n, -1)
    first[codes[::-1]] = np.arange(len(codes))[::-1]
    frame = pd.DataFrame({
        "pool": np.asarray(pool_ids, dtype=object),
        "size": sizes[first],
        "n_positive": np.bincount(codes[results == 1], minlength=n),
        "n_negative": np.bincount(codes[results == 0], minlength=n)})
    for c in groups:
        frame[c] = f[c].to_numpy(dtype=object)[first]
    return PooledData(frame, groups, table.path, notes, table)


def read_pools(path) -> PooledData:
    """Read a pools file ``pool,size,result[,group columns...]`` (one row per readout).

    Parameters
    ----------
    path : str or path-like
        The CSV file.

    Returns
    -------
    PooledData

    Raises
    ------
    InputError
        A bad file, naming file, line and column.

    References
    ----------
    RFC 4180 (comma-separated values); one row per readout as in Thompson (1962), Biometrics 18.

    Examples
    --------
    >>> import bayespool
    >>> pools = bayespool.read_pools("datasets/surveillance/pools.csv")
    >>> type(pools).__name__
    'PooledData'
    """
    return _from_table(read_table(path, list(REQUIRED), "pools"))


def pools_from_frame(frame: pd.DataFrame) -> PooledData:
    """The same from a DataFrame with the columns of a pools file (values read as text; errors
    name the 0-based row and the column)."""
    from ..io import FrameTable
    data = _from_table(FrameTable(frame, "pools", list(REQUIRED), "pools"))
    data.source = None
    return data


def pools_from_run(run, group_columns=None) -> PooledData:
    """Pools of a run with their sizes from the layout and groups from the samples file.

    A pool's group is its members' group, so every member must share it; a pool without a
    readout is left out.
    """
    sizes = run.pool_size
    tested = run.pool_read
    frame = pd.DataFrame({"pool": run.pool_ids, "size": sizes, "n_positive": run.n_positive,
                          "n_negative": run.n_negative})
    groups = []
    sm = run.samples
    if sm is not None:
        samples_file = run.sources.get("samples")
        groups = [c for c in sm.columns if c not in ("sample", "prior", "plate", "well")]
        owner = np.repeat(np.arange(run.n_pools), sizes)
        for c in groups:
            values = np.full(run.n_samples, None, dtype=object)
            values[sm.index.to_numpy()] = sm[c].to_numpy(dtype=object)
            member = values[run.pool_members]
            lacking = np.flatnonzero(pd.isna(member) & tested[owner])
            if len(lacking):
                j = int(lacking[0])
                raise InputError(f"sample {run.sample_ids[run.pool_members[j]]!r} of pool "
                                 f"{run.pool_ids[owner[j]]!r} has no row in the samples file, so "
                                 f"no {c!r}", samples_file)
            first = pd.Series(member).groupby(owner).transform("first").to_numpy()
            differ = np.flatnonzero((first != member) & tested[owner])
            if len(differ):
                j = int(differ[0])
                s = run.pool_members[j]
                row = int(np.flatnonzero(sm.index.to_numpy() == s)[0])
                raise InputError(f"pool {run.pool_ids[owner[j]]!r} mixes samples of {c} "
                                 f"{first[j]!r} and {member[j]!r}; a pool's members must share "
                                 "its group", samples_file, _line(samples_file, row),
                                 list(sm.columns).index(c) + 1)
            col = np.full(run.n_pools, "", dtype=object)
            col[owner[::-1]] = member[::-1]
            frame[c] = col
    return PooledData(frame[tested].reset_index(drop=True), groups, run.sources.get("layout"),
                      list(run.notes))


def _line(path, row: int) -> int | None:
    if path is None:
        return None
    from ..io import _line_of_row
    return _line_of_row(str(path), row)
