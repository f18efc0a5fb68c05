"""The specimens a design or a simulation is about: a count, or a samples file (with priors).

``--samples N`` makes ``N`` specimens with IDs ``S0001``...; ``--samples FILE`` reads the samples file
of interface.md (``sample`` column, optional ``prior``) and keeps its order, which designs follow when
they fill pools and grids.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError
from ..io import read_table
from ..samplesfile import check_samples


@dataclass
class Specimens:
    """IDs in design order and, when the samples file gives them, per-specimen priors (NaN = none)."""

    ids: np.ndarray
    prior: np.ndarray | None = None
    source: str | None = None
    table: pd.DataFrame | None = None  # the samples file's columns (plate, well, volume_ul, ...)

    def __len__(self) -> int:
        return len(self.ids)

    def positions(self):
        """Plates and wells (:class:`bayespool.plates.Positions`), None without a well column."""
        from ..plates import plate_positions
        return plate_positions(self.table, self.ids, self.source or "samples")

    def subset(self, keep: np.ndarray) -> "Specimens":
        """The specimens where ``keep`` is True, in the same order."""
        keep = np.asarray(keep, dtype=bool)
        return Specimens(self.ids[keep], None if self.prior is None else self.prior[keep],
                         self.source, None if self.table is None else
                         self.table[keep].reset_index(drop=True))

    def priors(self, prevalence: float) -> np.ndarray:
        """Per-specimen prior: the file's value, else ``prevalence``."""
        if self.prior is None:
            return np.full(len(self.ids), float(prevalence))
        return np.where(np.isnan(self.prior), float(prevalence), self.prior)


def numbered(n: int) -> np.ndarray:
    """IDs S0001..SN (zero-padded to at least four digits)."""
    width = max(4, len(str(n)))
    return np.array([f"S{i:0{width}d}" for i in range(1, n + 1)], dtype=object)


def read_samples(path) -> Specimens:
    """The samples file: ``sample`` (unique, non-empty) and optional ``prior`` in (0, 1)."""
    table = read_table(path, ["sample"], "samples")
    f = table.frame
    if len(f) == 0:
        raise InputError("samples file lists no specimen", str(path))
    prior_column = check_samples(table)
    prior = None if prior_column is None else prior_column[0]
    return Specimens(f["sample"].to_numpy(dtype=object), prior, str(path),
                     f.reset_index(drop=True))


def specimens(arg) -> Specimens:
    """``N`` (a whole number) or the path of a samples file; an int is taken as a count."""
    if isinstance(arg, Specimens):
        return arg
    if isinstance(arg, (int, np.integer)) and not isinstance(arg, bool):
        if arg < 1:
            raise InputError(f"samples must be at least 1, got {arg}", parameters=("samples",))
        return Specimens(numbered(int(arg)))
    if isinstance(arg, pd.DataFrame):
        if "sample" not in arg.columns:
            raise InputError("the samples table needs a 'sample' column")
        table = arg.astype(str).reset_index(drop=True)
        ids = table["sample"].str.strip().to_numpy(dtype=object)
        if len(set(ids.tolist())) != len(ids) or (ids == "").any():
            raise InputError("sample IDs must be unique and non-empty")
        prior = (pd.to_numeric(arg["prior"], errors="coerce").to_numpy(dtype=float)
                 if "prior" in arg.columns else None)
        return Specimens(ids, prior, None, table)
    if isinstance(arg, (list, tuple, np.ndarray, pd.Index)):
        ids = np.asarray([str(a) for a in arg], dtype=object)
        if len(ids) == 0:
            raise InputError("no specimen given")
        if len(set(ids.tolist())) != len(ids):
            raise InputError("specimen IDs must be unique")
        return Specimens(ids)
    text = str(arg).strip()
    if text.isdigit() and not Path(text).exists():
        return specimens(int(text))
    return read_samples(text)
