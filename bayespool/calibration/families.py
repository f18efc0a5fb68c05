"""Sensitivity families on an unconstrained scale, with Se, 1 - Se and dSe/du for binomial fits.

Each family maps a vector ``u`` of unconstrained parameters (logit for probabilities, log for
positive numbers) to Se(k, d). Fitting on that scale keeps the optimiser inside the parameter space
and makes Wald intervals respect it. ``1 - Se`` is computed directly (not by subtraction) so that
log(1 - Se) stays accurate when Se is close to 1.

The dilution family is the log-logistic fall of Hwang (1976, Group testing with a dilution effect,
Biometrika 63(3)): Se = se_max / (1 + (r / r50)^slope) in the dilution r = k / d.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit
from scipy.special import expit, logit

from ..assay import (ConstantSensitivity, DilutionSensitivity, Sensitivity, TableSensitivity,
                     dilution_point, table_entry)
from ..errors import InputError

LOGIT_BOUND = 23.0         # |logit| above this is treated as the boundary 0 or 1
FAMILIES = ("constant", "dilution", "table")
CONSTANT, DILUTION, TABLE = 0, 1, 2  # family codes for the kernel


@njit(cache=True)
def _expit(x):
    return 1.0 / (1.0 + np.exp(-x))


@njit(cache=True)
def sens_eval(code, u, log_r, entry, se, rest, jac):
    """Fill Se, 1 - Se and dSe/du (cells x parameters) for one family on the unconstrained scale.

    constant: Se = expit(u0). dilution: the assay's :func:`~bayespool.assay.dilution_point` with
    (logit se_max, log r50, log slope) = u. table: Se = expit(u[entry]).
    """
    n = len(log_r)
    jac[:, :] = 0.0
    if code == 0:
        s, r = _expit(u[0]), _expit(-u[0])
        for i in range(n):
            se[i] = s
            rest[i] = r
            jac[i, 0] = s * r
    elif code == 1:
        s, s_rest = _expit(u[0]), _expit(-u[0])
        b = np.exp(u[2])
        for i in range(n):
            se[i], rest[i], fall, z = dilution_point(log_r[i], s, s_rest, u[1], b)
            jac[i, 0] = se[i] * s_rest
            jac[i, 1] = se[i] * fall * b
            jac[i, 2] = -se[i] * fall * z
    else:
        for i in range(n):
            e = entry[i]
            s, r = _expit(u[e]), _expit(-u[e])
            se[i] = s
            rest[i] = r
            jac[i, e] = s * r


@dataclass(frozen=True)
class Param:
    """One parameter: its name, its scale ("logit" or "log") and bounds on the unconstrained scale."""

    name: str
    scale: str
    lower: float
    upper: float

    def natural(self, u):
        u = np.asarray(u, dtype=float)
        return expit(u) if self.scale == "logit" else np.exp(u)

    def unconstrained(self, v):
        v = np.asarray(v, dtype=float)
        if self.scale == "logit":
            return np.clip(logit(np.clip(v, 1e-300, 1.0)), self.lower, self.upper)
        return np.clip(np.log(v), self.lower, self.upper)

    def check(self, value, source=None) -> float:
        """A fixed value given by the user, checked against the parameter's range."""
        v = float(value)
        if self.scale == "logit" and not (0.0 < v <= 1.0):
            raise InputError(f"{self.name} = {value!r} must be in (0, 1]", source)
        if self.scale == "log" and not (0.0 < v < np.inf):
            raise InputError(f"{self.name} = {value!r} must be a positive number", source)
        return v


def probability(name: str) -> Param:
    return Param(name, "logit", -LOGIT_BOUND, LOGIT_BOUND)


class Family:
    """A sensitivity family: parameters, Se and its derivative, and the assay object it builds."""

    name: str
    code: int

    def params(self) -> list[Param]:
        raise NotImplementedError

    def kernel_inputs(self, k, d):
        """(log dilution, table entry index) per cell, the kernel's view of the cells."""
        k = np.asarray(k, dtype=float)
        d = np.asarray(d, dtype=float)
        return np.log(k / d), np.zeros(len(k), dtype=np.int64)

    def evaluate(self, u: np.ndarray, k: np.ndarray, d: np.ndarray):
        """(Se, 1 - Se, dSe/du) for arrays k, d >= 1; dSe/du has shape (len(k), len(u))."""
        log_r, entry = self.kernel_inputs(np.atleast_1d(k), np.atleast_1d(d))
        n = len(log_r)
        se, rest, jac = np.empty(n), np.empty(n), np.empty((n, len(u)))
        sens_eval(self.code, np.asarray(u, dtype=float), log_r, entry, se, rest, jac)
        return se, rest, jac

    def sensitivity(self, values: dict) -> Sensitivity:
        """The assay's sensitivity object for natural parameter values."""
        raise NotImplementedError

    def starts(self, k, d, trials, detected) -> list[np.ndarray]:
        """Starting points (natural scale, one dict per start) for the optimiser."""
        raise NotImplementedError

    def names(self) -> list[str]:
        return [p.name for p in self.params()]


def _rate(trials, detected):
    """Observed rate with half a count of continuity, strictly inside (0, 1)."""
    return (np.asarray(detected, float) + 0.5) / (np.asarray(trials, float) + 1.0)


class ConstantFamily(Family):
    """Se(k, d) = value, one parameter."""

    name = "constant"
    code = CONSTANT

    def params(self):
        return [probability("sensitivity")]

    def sensitivity(self, values):
        return ConstantSensitivity(float(values["sensitivity"]))

    def starts(self, k, d, trials, detected):
        return [{"sensitivity": float(_rate(np.sum(trials), np.sum(detected)))}]


class DilutionFamily(Family):
    """Se = se_max / (1 + (r / r50)^slope), r = k / d; parameters logit se_max, log r50, log slope."""

    name = "dilution"
    code = DILUTION

    def params(self):
        return [probability("se_max"), Param("r50", "log", np.log(1e-6), np.log(1e9)),
                Param("slope", "log", np.log(1e-3), np.log(200.0))]

    def sensitivity(self, values):
        return DilutionSensitivity(float(values["se_max"]), float(values["r50"]),
                                   float(values["slope"]))

    def starts(self, k, d, trials, detected):
        r = np.asarray(k, float) / np.asarray(d, float)
        rate = _rate(trials, detected)
        top = float(min(0.999, max(0.5, rate.max())))
        out = []
        for se_max in (top, 0.999, 0.9):
            y = np.clip(rate / se_max, 1e-3, 1 - 1e-3)
            # linear fit of logit(y) = slope * (log r50 - log r) on the observed cells
            x = np.log(r)
            w = np.asarray(trials, float)
            if np.ptp(x) > 0:
                slope_fit, icpt = np.polyfit(x, logit(y), 1, w=np.sqrt(w))
                slope = float(np.clip(-slope_fit, 0.05, 20.0))
                r50 = float(np.exp(np.clip(icpt / slope, -10, 18)))
            else:
                slope, r50 = 1.0, float(np.exp(x[0] + logit(y[0])))
            out.append({"se_max": se_max, "r50": r50, "slope": slope})
        out.append({"se_max": top, "r50": float(np.exp(np.median(np.log(r)))) * 2.0, "slope": 1.0})
        return out


class TableFamily(Family):
    """Se given per (pool size, positives): one probability per entry (a step function in d)."""

    name = "table"
    code = TABLE

    def __init__(self, entries):
        self.entries = [(int(k), int(d)) for k, d in entries]
        self._index = {e: i for i, e in enumerate(self.entries)}

    def params(self):
        return [probability(f"se[{k},{d}]") for k, d in self.entries]

    def entry_of(self, k, d) -> np.ndarray:
        """Index of the entry that holds for each (k, d) (:func:`bayespool.assay.table_entry`)."""
        k = np.asarray(k, np.int64)
        out = table_entry(self.entries, k, d)
        if (out < 0).any():
            size = int(np.min(k[out < 0]))
            raise InputError(f"the sensitivity table has no entry for pool size {size}")
        return out

    def kernel_inputs(self, k, d):
        return np.zeros(len(np.asarray(k))), self.entry_of(k, d)

    def sensitivity(self, values):
        rows = []
        for (k, d), p in zip(self.entries, self.params()):
            rows.append((k, 1 if d == min(e[1] for e in self.entries if e[0] == k) else d,
                         float(values[p.name])))
        return TableSensitivity(tuple(sorted(rows)))

    def starts(self, k, d, trials, detected):
        e = self.entry_of(k, d)
        n = np.bincount(e, weights=trials, minlength=len(self.entries))
        x = np.bincount(e, weights=detected, minlength=len(self.entries))
        return [{p.name: float(v) for p, v in zip(self.params(), _rate(n, x))}]


def check_fixed(fixed: dict, params, model: str, listed=None) -> None:
    """Every value of ``fixed`` must name one of ``params`` and lie in its range (InputError).

    ``listed``: the names to offer in the message (default: the parameters' own names).
    """
    known = {p.name: p for p in params}
    for name, value in fixed.items():
        if name not in known:
            names = listed if listed is not None else list(known)
            raise InputError(f"cannot fix {name!r}: the parameters of "
                             f"{'these models' if model == 'best' else 'this model'} are "
                             f"{', '.join(names)}")
        known[name].check(value)


def family(name: str, entries=None) -> Family:
    """The family called ``name`` (``entries`` are the (pool size, positives) of a table)."""
    if name == "constant":
        return ConstantFamily()
    if name == "dilution":
        return DilutionFamily()
    if name == "table":
        if not entries:
            raise InputError("the table family needs at least one (pool size, positives) entry")
        return TableFamily(entries)
    raise InputError(f"unknown sensitivity model {name!r} (choose one of "
                     f"{', '.join(FAMILIES)} or best)")
