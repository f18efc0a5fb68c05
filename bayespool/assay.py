"""The assay model: specificity, a sensitivity family Se(k, d), and per-pool likelihood vectors.

A pool of ``k`` specimens with ``d`` positive members reads positive with probability ``1 - Sp`` when
``d = 0`` and ``Se(k, d)`` otherwise. Se falls with the dilution factor ``k / d`` (Hwang 1976, Group
testing with a dilution effect, Biometrika 63(3)). All replicate readouts of one pool fold into one
vector ``log L[d] = sum_r log P(y_r | d)``, ``d = 0..k``, which is what every decoder consumes.
"""
from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field

import numpy as np
from numba import njit

from .errors import InputError
from .io import read_toml, write_text
from .results import result_words

MODELS = ("constant", "dilution", "table")


def _prob(value, name: str, source: str | None, low_open: bool = False) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}", source) from None
    if isinstance(value, bool) or not math.isfinite(v) or v < 0.0 or v > 1.0 or (low_open and v == 0):
        raise InputError(f"{name} = {value!r} is outside [0, 1]", source)
    return v


def _positive(value, name: str, source: str | None) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}", source) from None
    if isinstance(value, bool) or not math.isfinite(v) or v <= 0.0:
        raise InputError(f"{name} = {value!r} must be a positive number", source)
    return v


def _xlogy(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """x * log(y) with 0 * log(0) = 0 (a count of zero readouts contributes nothing)."""
    out = np.zeros(np.broadcast(x, y).shape)
    nz = x != 0
    with np.errstate(divide="ignore"):
        out[nz] = x[nz] * np.log(y[nz])
    return out


def _get(table: dict, key: str, where: str, source: str | None):
    if key not in table:
        raise InputError(f"{where} lacks the key '{key}'", source)
    return table[key]


class Sensitivity(ABC):
    """Se(k, d): probability that a pool of size k with d >= 1 positive members reads positive."""

    model: str

    @abstractmethod
    def __call__(self, k, d) -> np.ndarray:
        """Vectorised Se for arrays of pool sizes ``k`` and positive counts ``d >= 1``."""

    @abstractmethod
    def to_dict(self) -> dict:
        """The ``[sensitivity]`` table of the assay file."""

    def depends_on_count(self) -> bool:
        """False when Se(k, d) is the same for every d >= 1 (decoders then take an O(k) path)."""
        return True

    def check_pool_sizes(self, sizes, source: str | None = None) -> None:
        """Raise InputError if some pool size in ``sizes`` is not covered by the model."""


@dataclass(frozen=True)
class ConstantSensitivity(Sensitivity):
    """Se(k, d) = value for every pool size and count.

    Examples
    --------
    >>> from bayespool import Assay, ConstantSensitivity
    >>> Assay(0.995, ConstantSensitivity(0.95)).describe()
    'constant: Se = 0.95, Sp = 0.995'
    """

    value: float
    model: str = field(default="constant", init=False)

    def __call__(self, k, d):
        return np.full(np.broadcast(np.asarray(k), np.asarray(d)).shape, self.value, dtype=float)

    def to_dict(self):
        return {"model": "constant", "value": self.value}

    def depends_on_count(self):
        return False


@njit(cache=True)
def dilution_point(log_r, se_max, miss_max, log_r50, slope):
    """The dilution family at one log dilution: ``(Se, 1 - Se, fall, z)``.

    z = slope (log r - log r50); ``fall`` = 1 / (1 + e^-z) is the share of ``se_max`` lost to
    dilution, so Se = se_max / (1 + (r / r50)^slope) = se_max (1 - fall). ``1 - Se`` is
    ``miss_max + se_max fall`` (``miss_max`` = 1 - se_max, given apart so that it can be exact), never
    a subtraction, so log(1 - Se) stays accurate near Se = 1. The one definition of the family: the
    assay evaluates it and calibration differentiates it (Hwang 1976).
    """
    z = slope * (log_r - log_r50)
    fall, keep = 1.0 / (1.0 + np.exp(-z)), 1.0 / (1.0 + np.exp(z))
    return se_max * keep, miss_max + se_max * fall, fall, z


@njit(cache=True)
def _dilution_curve(log_r, se_max, log_r50, slope):
    out = np.empty(len(log_r))
    for i in range(len(log_r)):
        out[i] = dilution_point(log_r[i], se_max, 1.0 - se_max, log_r50, slope)[0]
    return out


@dataclass(frozen=True)
class DilutionSensitivity(Sensitivity):
    """Log-logistic fall in the dilution factor r = k / d: Se = se_max / (1 + (r / r50) ** slope)
    (:func:`dilution_point`).

    ``r50`` is the dilution at which sensitivity is half of ``se_max``.

    References
    ----------
    Hwang, F. K. (1976). Group testing with a dilution effect. Biometrika 63(3).

    Examples
    --------
    >>> from bayespool import Assay, DilutionSensitivity
    >>> assay = Assay(0.995, DilutionSensitivity(0.98, 200.0, 1.5))
    >>> round(float(assay.se(200, 1)), 2)   # half of se_max at k / d = r50
    0.49
    """

    se_max: float
    r50: float
    slope: float
    model: str = field(default="dilution", init=False)

    def __call__(self, k, d):
        r = np.asarray(k, dtype=float) / np.asarray(d, dtype=float)
        log_r = np.log(r)
        out = _dilution_curve(np.ascontiguousarray(log_r, dtype=float).ravel(),
                              float(self.se_max), float(np.log(self.r50)), float(self.slope))
        return out.reshape(log_r.shape)[()]  # a scalar for scalar k and d, as numpy gives

    def to_dict(self):
        return {"model": "dilution", "se_max": self.se_max, "r50": self.r50, "slope": self.slope}


@dataclass(frozen=True)
class TableSensitivity(Sensitivity):
    """Se given per (pool size, positives); an entry holds for its count and every larger one up to
    the next entry of the same pool size.

    Examples
    --------
    >>> from bayespool import Assay, TableSensitivity
    >>> table = TableSensitivity([(4, 1, 0.90), (4, 2, 0.97)])
    >>> [round(float(Assay(0.99, table).se(4, d)), 2) for d in (1, 2, 3)]
    [0.9, 0.97, 0.97]
    """

    entries: tuple  # sorted tuples (pool_size, positives, value)
    model: str = field(default="table", init=False)

    def _steps(self):  # pool size -> (counts, values)
        steps: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        for size in sorted({e[0] for e in self.entries}):
            rows = [e for e in self.entries if e[0] == size]
            steps[size] = (np.array([r[1] for r in rows], dtype=np.int64),
                           np.array([r[2] for r in rows], dtype=float))
        return steps

    def check_pool_sizes(self, sizes, source=None):
        steps = self._steps()
        for size in np.unique(np.asarray(sizes, dtype=np.int64)):
            if int(size) not in steps:
                covered = ", ".join(str(s) for s in steps)
                raise InputError(f"the sensitivity table does not cover pool size {int(size)} "
                                 f"(it has pool sizes {covered})", source)
            if steps[int(size)][0][0] > 1:
                raise InputError(f"the sensitivity table for pool size {int(size)} starts at "
                                 f"{steps[int(size)][0][0]} positives; it must cover 1", source)

    def __call__(self, k, d):
        k, d = np.broadcast_arrays(np.asarray(k, dtype=np.int64), np.asarray(d, dtype=np.int64))
        self.check_pool_sizes(k)
        values = np.array([e[2] for e in self.entries], dtype=float)
        return values[table_entry(self.entries, k.ravel(), d.ravel())].reshape(k.shape)

    def to_dict(self):
        return {"model": "table", "table": [{"pool_size": int(s), "positives": int(p), "value": v}
                                            for s, p, v in self.entries]}

    def depends_on_count(self):
        steps = self._steps()
        return any(len(np.unique(v)) > 1 for _, v in steps.values())


def table_entry(entries, k, d) -> np.ndarray:
    """Index into ``entries`` ((pool_size, positives, ...) tuples) of the table entry that holds for
    each (k, d): the entry of that pool size with the largest count <= d (the first one for smaller
    d); -1 where the table has no entry for the pool size. The one reading of a table, shared by
    the assay and calibration."""
    k = np.asarray(k, dtype=np.int64)
    d = np.asarray(d, dtype=np.int64)
    out = np.full(len(k), -1, dtype=np.int64)
    for size in np.unique(k):
        rows = sorted((int(e[1]), i) for i, e in enumerate(entries) if int(e[0]) == size)
        if not rows:
            continue
        counts = np.array([r[0] for r in rows], dtype=np.int64)
        index = np.array([r[1] for r in rows], dtype=np.int64)
        sel = k == size
        pos = np.searchsorted(counts, d[sel], side="right") - 1
        out[sel] = index[np.maximum(pos, 0)]
    return out


def sensitivity_from_dict(table: dict, source: str | None = None) -> Sensitivity:
    """Build a sensitivity family from the ``[sensitivity]`` table of an assay file."""
    if not isinstance(table, dict):
        raise InputError("[sensitivity] must be a table", source)
    model = _get(table, "model", "[sensitivity]", source)
    if model == "constant":
        return ConstantSensitivity(_prob(_get(table, "value", "[sensitivity]", source),
                                         "sensitivity value", source))
    if model == "dilution":
        return DilutionSensitivity(
            _prob(_get(table, "se_max", "[sensitivity]", source), "sensitivity se_max", source),
            _positive(_get(table, "r50", "[sensitivity]", source), "sensitivity r50", source),
            _positive(_get(table, "slope", "[sensitivity]", source), "sensitivity slope", source))
    if model == "table":
        rows = _get(table, "table", "[sensitivity]", source)
        if not isinstance(rows, list) or not rows:
            raise InputError("[[sensitivity.table]] must list at least one entry", source)
        entries = []
        for i, row in enumerate(rows, start=1):
            where = f"[[sensitivity.table]] entry {i}"
            if not isinstance(row, dict):
                raise InputError(f"{where} must be a table", source)
            size = _get(row, "pool_size", where, source)
            pos = _get(row, "positives", where, source)
            if not (isinstance(size, int) and not isinstance(size, bool) and size >= 1):
                raise InputError(f"{where}: pool_size = {size!r} must be a whole number >= 1", source)
            if not (isinstance(pos, int) and not isinstance(pos, bool) and 1 <= pos <= size):
                raise InputError(f"{where}: positives = {pos!r} must be a whole number in "
                                 f"1..pool_size ({size})", source)
            entries.append((size, pos, _prob(_get(row, "value", where, source),
                                             f"{where}: value", source)))
        keys = [(e[0], e[1]) for e in entries]
        if len(set(keys)) != len(keys):
            dup = next(k for k in keys if keys.count(k) > 1)
            raise InputError(f"the sensitivity table gives pool size {dup[0]} with {dup[1]} "
                             "positives twice", source)
        return TableSensitivity(tuple(sorted(entries)))
    raise InputError(f"unknown sensitivity model {model!r} (choose one of {', '.join(MODELS)})",
                     source)


@dataclass(frozen=True)
class Assay:
    """Specificity plus a sensitivity family; builds per-pool log-likelihood vectors.

    References
    ----------
    Dilution effect: Hwang (1976), Biometrika 63(3). Pooled readouts with Se and Sp: Kim et al.
    (2007), Biometrics 63(4).

    Examples
    --------
    >>> from bayespool import Assay, ConstantSensitivity
    >>> assay = Assay(0.99, ConstantSensitivity(0.95))
    >>> float(assay.se(4, 1))
    0.95
    """

    specificity: float
    sensitivity: Sensitivity
    details: dict = field(default_factory=dict, compare=False)  # fit details; decoders ignore them
    results: dict = field(default_factory=dict, compare=False)  # the laboratory's result words

    def __post_init__(self):
        _prob(self.specificity, "specificity", None)

    # ---- the model
    @property
    def ct(self):
        """The Ct load model (:class:`bayespool.ct.CtModel`) of a ``[ct]`` assay, else None."""
        return getattr(self.sensitivity, "ct", None)

    def se(self, k, d) -> np.ndarray:
        return self.sensitivity(k, d)

    def positive_probability(self, k, d) -> np.ndarray:
        """P(positive readout | pool size k, d positives), for d = 0 too."""
        k, d = np.broadcast_arrays(np.asarray(k), np.asarray(d))
        out = np.full(k.shape, 1.0 - self.specificity)
        pos = d > 0
        if pos.any():
            out[pos] = self.sensitivity(k[pos], d[pos])
        return out

    def draw_readouts(self, pool_size, positives, rng) -> np.ndarray:
        """Simulated readouts (True = positive) of pools with the given sizes and positive counts."""
        p = self.positive_probability(np.asarray(pool_size), np.asarray(positives))
        return rng.random(p.shape) < p

    def log_likelihood(self, pool_size, n_positive, n_negative):
        """Flat per-pool log-likelihood vectors.

        Returns ``(ptr, values)``: pool ``t`` owns ``values[ptr[t]:ptr[t+1]]`` = log L_t[d], d = 0..k_t,
        with ``log 0 = -inf`` where Se or Sp is 1 (hard constraints, exact). Memory is linear in the
        number of memberships.
        """
        if self.ct is not None:  # replicates share the pool's Ct: integrate, do not multiply
            from .ct_evidence import PoolCtStats, pool_log_likelihood
            stats = PoolCtStats.binary(n_positive, n_negative)
            return pool_log_likelihood(self, pool_size, stats)
        k = np.asarray(pool_size, dtype=np.int64)
        npos = np.asarray(n_positive, dtype=float)
        nneg = np.asarray(n_negative, dtype=float)
        ptr = np.zeros(len(k) + 1, dtype=np.int64)
        np.cumsum(k + 1, out=ptr[1:])
        total = int(ptr[-1])
        owner = np.repeat(np.arange(len(k)), k + 1)
        d = np.arange(total, dtype=np.int64) - ptr[owner]
        kk = k[owner]
        p_pos = self.positive_probability(kk, d)
        values = _xlogy(npos[owner], p_pos) + _xlogy(nneg[owner], 1.0 - p_pos)
        return ptr, values

    # ---- the file
    def to_dict(self) -> dict:
        key = "ct" if self.ct is not None else "sensitivity"
        out = {"specificity": self.specificity, key: self.sensitivity.to_dict()}
        if self.results:
            out["results"] = self.results
        if self.details:
            out["fit"] = self.details
        return out

    def to_toml(self) -> str:
        import tomli_w
        return tomli_w.dumps(self.to_dict())

    def write(self, path) -> None:
        write_text(self.to_toml(), path)

    @classmethod
    def from_dict(cls, data: dict, source: str | None = None) -> "Assay":
        sp = _prob(_get(data, "specificity", "the assay file", source), "specificity", source)
        if "ct" in data:
            if "sensitivity" in data:
                raise InputError("the assay file has both a [ct] table and a [sensitivity] table; "
                                 "a [ct] assay implies its sensitivity, so keep only one of them",
                                 source)
            from .ct import CtModel, CtSensitivity
            sens = CtSensitivity(CtModel.from_dict(data["ct"], source))
        else:
            sens = sensitivity_from_dict(_get(data, "sensitivity", "the assay file", source),
                                         source)
        details = data.get("fit", {}) if isinstance(data.get("fit", {}), dict) else {}
        results = data.get("results", {})
        if not isinstance(results, dict):
            raise InputError("[results] must be a table of result words, e.g. positive = "
                             '["detected"]', source)
        result_words(results, source)  # refuses a malformed table here, naming the file
        return cls(sp, sens, details, results)

    @classmethod
    def read(cls, path) -> "Assay":
        return cls.from_dict(read_toml(path, "assay"), str(path))

    def describe(self) -> str:
        s = self.sensitivity
        if self.ct is not None:
            return f"ct: {self.ct.describe()}, Sp = {self.specificity:g}"
        if s.model == "constant":
            se = f"Se = {s.value:g}"
        elif s.model == "dilution":
            se = f"Se = {s.se_max:g} / (1 + (k/(d*{s.r50:g}))^{s.slope:g})"
        else:
            se = f"Se from a table of {len(s.entries)} entries"
        return f"{s.model}: {se}, Sp = {self.specificity:g}"


DEFAULT_ASSAY = Assay(0.99, ConstantSensitivity(0.95))
PERFECT_ASSAY = Assay(1.0, ConstantSensitivity(1.0))   # Se = Sp = 1: the classic surveillance model


def read_assay(path) -> Assay:
    """Read an assay file: the specificity and Se(k, d), or a ``[ct]`` load model.

    Parameters
    ----------
    path : str or path-like
        A TOML file with ``specificity`` and a ``[sensitivity]`` table (model ``constant``,
        ``dilution`` or ``table``), or a ``[ct]`` table; ``bayespool calibrate`` writes one.

    Returns
    -------
    Assay

    Raises
    ------
    InputError
        A missing or unreadable file, or a value out of range (naming the key).

    References
    ----------
    TOML v1.0.0 (the file format). The dilution model Se(k, d) = se_max / (1 + (k / (d r50)) ^
    slope) follows the dilution effect of Hwang (1976), Biometrika 63(3).

    Examples
    --------
    >>> import bayespool
    >>> assay = bayespool.read_assay("datasets/demo/assay.toml")
    >>> assay.sensitivity.model, round(assay.specificity, 4)
    ('dilution', 0.9967)
    """
    return Assay.read(path)


DEFAULT_POOL_SIZES = (1, 2, 4, 8, 16, 32)


def sensitivity_table(assay: Assay, pool_sizes=None):
    """Se(k, d) for every pool size k and d = 1..k, as a DataFrame (pool_size, positives, value).

    ``pool_sizes`` defaults to the table's pool sizes for a ``table`` assay and to
    :data:`DEFAULT_POOL_SIZES` otherwise; a size the assay does not cover raises InputError.
    """
    import pandas as pd
    if pool_sizes is None:
        s = assay.sensitivity
        pool_sizes = sorted({e[0] for e in s.entries}) if s.model == "table" else DEFAULT_POOL_SIZES
    sizes = []
    for k in pool_sizes:
        if isinstance(k, bool) or int(k) != k or k < 1:
            raise InputError(f"pool_sizes must be whole numbers >= 1, got {k!r}")
        sizes.append(int(k))
    sizes = sorted(set(sizes))
    assay.sensitivity.check_pool_sizes(np.array(sizes), None)
    k = np.repeat(sizes, sizes)
    d = np.concatenate([np.arange(1, s + 1) for s in sizes])
    return pd.DataFrame({"pool_size": k, "positives": d, "value": assay.se(k, d)})
