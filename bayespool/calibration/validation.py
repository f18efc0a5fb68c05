"""Validation runs with known truth: the ``pool_size,positives,result`` file and its cells.

Each row is one readout of a pool of ``pool_size`` specimens of which ``positives`` are known to be
positive (spiked or previously characterised). Rows with ``positives = 0`` inform the specificity,
the others the sensitivity Se(k, d). Readouts are grouped into cells, one per (pool size, positives),
which is all the likelihood needs (binomial counts).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError
from ..io import Table, read_table
from ..results import parse_results, skipped_note

COLUMNS = ["pool_size", "positives", "result"]


@dataclass(frozen=True)
class Cells:
    """Binomial cells: ``trials`` readouts of pools of size ``k`` with ``d`` positives, of which
    ``detected`` read positive. Counts may be fractional (expected counts)."""

    k: np.ndarray
    d: np.ndarray
    trials: np.ndarray
    detected: np.ndarray

    def __len__(self) -> int:
        return len(self.k)

    def select(self, mask) -> "Cells":
        mask = np.asarray(mask)
        return Cells(self.k[mask], self.d[mask], self.trials[mask], self.detected[mask])

    @property
    def dilution(self) -> np.ndarray:
        """Dilution factor k / d (infinite where d = 0)."""
        with np.errstate(divide="ignore"):
            return self.k / np.where(self.d > 0, self.d, 0).astype(float)


@dataclass
class ValidationData:
    """Validation readouts with known numbers of positive members.

    Examples
    --------
    >>> from bayespool import ValidationData
    >>> data = ValidationData.read("datasets/demo/invented_validation.csv")
    >>> type(data).__name__
    'ValidationData'
    """

    pool_size: np.ndarray   # int64 per readout
    positives: np.ndarray   # int64 per readout
    result: np.ndarray      # int8 per readout, 1 positive, 0 negative
    source: str | None = None
    skipped: int = 0        # rows marked invalid
    notes: list = field(default_factory=list)

    @property
    def n_rows(self) -> int:
        return len(self.result)

    def cells(self) -> Cells:
        """One cell per (pool size, positives), sorted."""
        pairs = np.stack([self.pool_size, self.positives], axis=1)
        keys, inverse = np.unique(pairs, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        trials = np.bincount(inverse, minlength=len(keys)).astype(float)
        detected = np.bincount(inverse, weights=self.result.astype(float), minlength=len(keys))
        return Cells(keys[:, 0].astype(np.int64), keys[:, 1].astype(np.int64), trials, detected)

    def sensitivity_cells(self) -> Cells:
        c = self.cells()
        return c.select(c.d > 0)

    def specificity_counts(self) -> tuple[int, int]:
        """(readouts of pools without a positive member, how many of them read negative)."""
        neg = self.positives == 0
        return int(neg.sum()), int((self.result[neg] == 0).sum())

    @classmethod
    def read(cls, path, *, words: dict | None = None) -> "ValidationData":
        """Read and check a validation CSV (interface.md); bad cells raise InputError with the line
        and column."""
        table = read_table(path, COLUMNS, "validation")
        data = cls.from_table(table, words=words)
        data.source = str(path)
        return data

    @classmethod
    def from_frame(cls, frame: pd.DataFrame, name: str = "<validation>") -> "ValidationData":
        """Build from a DataFrame with the file's columns (values checked as in the file)."""
        missing = [c for c in COLUMNS if c not in frame.columns]
        if missing:
            raise InputError(f"validation data lacks column(s) {', '.join(missing)}", name)
        f = frame.astype(str).apply(lambda c: c.str.strip()).reset_index(drop=True)
        return cls.from_table(Table(f, name, [str(c) for c in f.columns]), name=name)

    @classmethod
    def from_arrays(cls, pool_size, positives, result) -> "ValidationData":
        """Build from arrays (result as booleans or 0/1), with the same checks (errors name the
        0-based row)."""
        arrays = {}
        for name, values in (("pool_size", pool_size), ("positives", positives),
                             ("result", result)):
            v = np.asarray(values)
            if v.ndim != 1:
                raise InputError(f"{name} must be one-dimensional")
            num = v.astype(float) if v.dtype != bool else v.astype(float)
            bad = ~np.isfinite(num) | (num != np.round(num))
            if bad.any():
                raise InputError(f"{name} at row {int(np.flatnonzero(bad)[0])} is not a whole "
                                 "number")
            arrays[name] = num.astype(np.int64)
        k, d, y = arrays["pool_size"], arrays["positives"], arrays["result"]
        if not (len(k) == len(d) == len(y)) or len(k) == 0:
            raise InputError("pool_size, positives and result must have the same non-zero length")
        checks = ((k < 1, "pool_size is below 1"), (d < 0, "positives is negative"),
                  (d > k, "positives exceeds pool_size"), ((y != 0) & (y != 1),
                                                          "result is not 0 or 1"))
        for bad, what in checks:
            if bad.any():
                raise InputError(f"row {int(np.flatnonzero(bad)[0])}: {what}")
        return cls(k, d, y.astype(np.int8), "<arrays>")

    @classmethod
    def from_table(cls, table: Table, name: str | None = None, *,
                   words: dict | None = None) -> "ValidationData":
        f = table.frame
        if len(f) == 0:
            raise InputError("validation file has a header but no rows", table.path)
        k = _whole(table, "pool_size", minimum=1)
        d = _whole(table, "positives", minimum=0)
        over = d > k
        if over.any():
            r = int(np.flatnonzero(over)[0])
            raise table.error(f"positives = {d[r]} exceeds pool_size = {k[r]}", r, "positives")
        res = parse_results(table, words=words)
        keep = res >= 0
        skipped = int((~keep).sum())
        notes = [skipped_note(table, res)] if skipped else []
        if not keep.any():
            raise InputError("validation file has no valid readouts (every row is invalid)",
                             table.path)
        return cls(k[keep], d[keep], res[keep].astype(np.int8), name or table.path, skipped, notes)


def _whole(table: Table, column: str, minimum: int) -> np.ndarray:
    """A column of whole numbers >= minimum; the first bad cell is an error at its line."""
    raw = table.frame[column]
    vals = pd.to_numeric(raw.where(raw != "", "nan"), errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(vals) | (vals != np.round(vals))
    if bad.any():
        r = int(np.flatnonzero(bad)[0])
        shown = raw.iat[r]
        what = "is empty" if shown == "" else f"{shown!r} is not a whole number"
        raise table.error(f"{column} {what}", r, column)
    low = vals < minimum
    if low.any():
        r = int(np.flatnonzero(low)[0])
        kind = "negative" if vals[r] < 0 else "below 1"
        raise table.error(f"{column} = {raw.iat[r]} is {kind} (must be a whole number >= "
                          f"{minimum})", r, column)
    return vals.astype(np.int64)
