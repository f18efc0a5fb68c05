"""The Ct load model: a pool's cycle threshold from its positive members' individual Cts.

A positive specimen i carries an individual Ct c_i (the Ct it would read alone), drawn from a mixture
of normals; c_i is shared by every pool that holds i. A pool of k members whose positive members
form the set D has the noiseless Ct

    C = s log2 k - s log2 sum_{i in D} 2^(-c_i / s),      s = cycles_per_doubling,

(equal volumes: target amounts add up, the pool dilutes them k-fold; a 1:k dilution at 100 %
efficiency raises the Ct by log2 k cycles, common practice). Each readout amplifies with probability
``detection_max`` and then reads y = C + e, e ~ Normal(0, noise_sd^2); y >= cutoff is reported as no
amplification. A pool without positives amplifies with probability 1 - Sp, at a Ct uniform on
[false_positive_low, cutoff).

Everything that integrates over individual Cts uses one discretisation: the mixture on a uniform
grid (trapezoid rule, tails beyond 7 standard deviations dropped, about 3e-12 of the mass), and the
"effective individual Ct" of d independent positives, c_D = -s log2 sum 2^(-c_i / s), built by
adding one positive at a time on the grid (each pair's mass split linearly between the two grid
nodes around its value). The implied sensitivity Se(k, d) = P(a readout amplifies | k, d) follows.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.special import log_ndtr, ndtr

from .errors import InputError

TAIL_SD = 7.0          # grid span beyond the outermost mixture component, in its sds
STEP = 0.1             # largest grid step in cycles (error of the effective-Ct grid is O(step^2))
LOG_TWO_PI = math.log(2.0 * math.pi)


def _number(table: dict, key: str, where: str, source, default=None) -> float:
    if key not in table:
        if default is not None:
            return default
        raise InputError(f"{where} lacks the key '{key}'", source)
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{where} {key} = {value!r} must be a finite number", source)
    return float(value)


@dataclass(frozen=True)
class CtModel:
    """The ``[ct]`` table of an assay file (see the module docstring for the model)."""

    cutoff: float
    cycles_per_doubling: float
    noise_sd: float
    false_positive_low: float
    weights: tuple
    means: tuple
    sds: tuple
    detection_max: float = 1.0

    def __post_init__(self):
        _validate(self, None)

    # ---- the file
    @classmethod
    def from_dict(cls, table, source: str | None = None) -> "CtModel":
        """Build from the ``[ct]`` table; every error names the file and the key."""
        if not isinstance(table, dict):
            raise InputError("[ct] must be a table", source)
        where = "[ct]"
        known = {"cutoff", "cycles_per_doubling", "noise_sd", "detection_max",
                 "false_positive_low", "positive"}
        unknown = sorted(set(table) - known)
        if unknown:
            raise InputError(f"[ct] has the unknown key '{unknown[0]}' (keys: "
                             f"{', '.join(sorted(known))})", source)
        rows = table.get("positive")
        if not isinstance(rows, list) or not rows:
            raise InputError("[ct] lacks the key 'positive': give at least one [[ct.positive]] "
                             "component (weight, mean, sd)", source)
        weights, means, sds = [], [], []
        for i, row in enumerate(rows, start=1):
            w = f"[[ct.positive]] entry {i}:"
            if not isinstance(row, dict):
                raise InputError(f"{w} must be a table", source)
            weights.append(_number(row, "weight", w, source))
            means.append(_number(row, "mean", w, source))
            sds.append(_number(row, "sd", w, source))
        values = dict(cutoff=_number(table, "cutoff", where, source),
                      cycles_per_doubling=_number(table, "cycles_per_doubling", where, source),
                      noise_sd=_number(table, "noise_sd", where, source),
                      false_positive_low=_number(table, "false_positive_low", where, source),
                      detection_max=_number(table, "detection_max", where, source, 1.0),
                      weights=tuple(weights), means=tuple(means), sds=tuple(sds))
        model = object.__new__(cls)
        for k, v in values.items():
            object.__setattr__(model, k, v)
        _validate(model, source)
        return model

    def to_dict(self) -> dict:
        return {"cutoff": self.cutoff, "cycles_per_doubling": self.cycles_per_doubling,
                "noise_sd": self.noise_sd, "detection_max": self.detection_max,
                "false_positive_low": self.false_positive_low,
                "positive": [{"weight": w, "mean": m, "sd": s}
                             for w, m, s in zip(self.weights, self.means, self.sds)]}

    def describe(self) -> str:
        mix = " + ".join(f"{w:g} N({m:g}, {s:g}^2)"
                         for w, m, s in zip(self.weights, self.means, self.sds))
        return (f"Ct model: cutoff {self.cutoff:g}, {self.cycles_per_doubling:g} cycles per "
                f"doubling, noise sd {self.noise_sd:g}, detection_max {self.detection_max:g}, "
                f"false amplification Ct uniform on [{self.false_positive_low:g}, "
                f"{self.cutoff:g}); individual Ct of a positive ~ {mix}")

    # ---- the discretisation
    @property
    def step(self) -> float:
        """Grid step in cycles: fine against the narrowest feature (noise sd, component sd)."""
        return min(STEP, self.noise_sd / 5.0, min(self.sds) / 5.0)

    def prior_grid(self, step: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Nodes and probability masses of the individual-Ct mixture (trapezoid rule)."""
        return _prior_grid(self, self.step if step is None else float(step))

    def mixture_logpdf(self, c) -> np.ndarray:
        c = np.asarray(c, dtype=float)[..., None]
        w, m, s = (np.asarray(v) for v in (self.weights, self.means, self.sds))
        z = (c - m) / s
        return _logsumexp(np.log(w) - 0.5 * z * z - np.log(s) - 0.5 * LOG_TWO_PI, axis=-1)

    def effective_ct(self, d: int) -> tuple[np.ndarray, np.ndarray]:
        """Nodes and masses of c_D = -s log2 sum_{i in D} 2^(-c_i / s) for d independent positives."""
        if d < 1:
            raise ValueError("d must be at least 1")
        return _effective(self, int(d))

    def pool_shift(self, k) -> np.ndarray:
        """s log2 k: the dilution's rise of the Ct in a pool of k."""
        return self.cycles_per_doubling * np.log2(np.asarray(k, dtype=float))

    def combine(self, a, b) -> np.ndarray:
        """Effective Ct of two groups of positives with effective Cts a and b."""
        s = self.cycles_per_doubling
        a, b = np.asarray(a, float), np.asarray(b, float)
        return np.minimum(a, b) - s * np.log2(1.0 + np.exp2(-np.abs(a - b) / s))

    # ---- the implied sensitivity
    def amplify_probability(self, pool_ct) -> np.ndarray:
        """P(a readout amplifies below the cutoff | noiseless pool Ct)."""
        z = (self.cutoff - np.asarray(pool_ct, float)) / self.noise_sd
        return self.detection_max * ndtr(z)

    def implied_sensitivity(self, k, d) -> np.ndarray:
        """Se(k, d) = P(a readout amplifies | pool of k, d >= 1 positives), vectorised."""
        k, d = np.broadcast_arrays(np.asarray(k, dtype=float), np.asarray(d, dtype=np.int64))
        out = np.empty(k.shape)
        if np.any(d < 1):
            raise ValueError("Se(k, d) needs d >= 1")
        for dd in np.unique(d):
            nodes, mass = self.effective_ct(int(dd))
            sel = d == dd
            shift = self.pool_shift(k[sel])
            out[sel] = self.amplify_probability(nodes[None, :] + shift[:, None]) @ mass
        return out

    # ---- readouts given the noiseless Ct
    def log_readout_factor(self, pool_ct, n_ct, sum_ct, sum_ct2, n_none, n_unknown) -> np.ndarray:
        """log P(a pool's readouts | noiseless pool Ct C) for pools with d >= 1 positives.

        The readouts enter through sufficient statistics: ``n_ct`` Ct readouts with sum ``sum_ct``
        and sum of squares ``sum_ct2``, ``n_none`` without amplification (no Ct, or a Ct at or
        above the cutoff), ``n_unknown`` amplified with no Ct value. Broadcasts over its arguments.
        """
        c = np.asarray(pool_ct, float)
        sd = self.noise_sd
        n_ct = np.asarray(n_ct, float)
        quad = (np.asarray(sum_ct2, float) - 2.0 * c * np.asarray(sum_ct, float)
                + n_ct * c * c) / (sd * sd)
        out = n_ct * (math.log(self.detection_max) - math.log(sd) - 0.5 * LOG_TWO_PI) - 0.5 * quad
        z = (self.cutoff - c) / sd
        n_none = np.asarray(n_none, float)
        n_unknown = np.asarray(n_unknown, float)
        if np.any(n_none > 0):
            if self.detection_max >= 1.0:
                miss = log_ndtr(-z)
            else:
                miss = np.log1p(-self.detection_max * ndtr(z))
            out = out + np.where(n_none > 0, n_none * miss, 0.0)
        if np.any(n_unknown > 0):
            hit = math.log(self.detection_max) + log_ndtr(z)
            out = out + np.where(n_unknown > 0, n_unknown * hit, 0.0)
        return out

    def log_negative_pool(self, specificity, n_ct, ct_min, ct_max, n_none, n_unknown) -> np.ndarray:
        """log P(a pool's readouts | no positive member): amplification with probability 1 - Sp,
        at a Ct uniform on [false_positive_low, cutoff). A Ct outside that range is impossible
        (log 0), as is any amplification when Sp = 1."""
        n_ct = np.asarray(n_ct, float)
        n_amp = n_ct + np.asarray(n_unknown, float)
        n_none = np.asarray(n_none, float)
        with np.errstate(divide="ignore"):
            out = (np.where(n_amp > 0, n_amp * np.log(1.0 - specificity), 0.0)
                   + np.where(n_none > 0, n_none * np.log(specificity), 0.0)
                   - n_ct * math.log(self.cutoff - self.false_positive_low))
        inside = (n_ct == 0) | ((np.asarray(ct_min) >= self.false_positive_low)
                                & (np.asarray(ct_max) < self.cutoff))
        return np.where(inside, out, -np.inf)

    # ---- simulation
    def draw_individual_ct(self, n: int, rng) -> np.ndarray:
        """Individual Cts of ``n`` positive specimens from the mixture."""
        comp = rng.choice(len(self.weights), size=n, p=np.asarray(self.weights))
        return rng.normal(np.asarray(self.means)[comp], np.asarray(self.sds)[comp])

    def draw_readout_ct(self, pool_ct, rng) -> np.ndarray:
        """One readout per noiseless pool Ct (NaN where there is no amplification)."""
        c = np.asarray(pool_ct, float)
        y = c + rng.normal(0.0, self.noise_sd, c.shape)
        hit = (rng.random(c.shape) < self.detection_max) & (y < self.cutoff)
        return np.where(hit, y, np.nan)


def _validate(m: CtModel, source) -> None:
    def bad(key, text):
        raise InputError(f"[ct] {key} = {getattr(m, key)!r} {text}", source)
    for key in ("cutoff", "cycles_per_doubling", "noise_sd", "false_positive_low",
                "detection_max"):
        v = getattr(m, key)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            bad(key, "must be a finite number")
    for key in ("cycles_per_doubling", "noise_sd", "cutoff"):
        if getattr(m, key) <= 0:
            bad(key, "must be positive")
    if not 0.0 < m.detection_max <= 1.0:
        bad("detection_max", "must be in (0, 1]")
    if m.cutoff <= m.false_positive_low:
        raise InputError(f"[ct] cutoff = {m.cutoff!r} must be above false_positive_low = "
                         f"{m.false_positive_low!r} (false amplifications read between them)",
                         source)
    if m.false_positive_low < 0:
        bad("false_positive_low", "must not be negative")
    if not (len(m.weights) == len(m.means) == len(m.sds)) or not m.weights:
        raise InputError("[[ct.positive]] needs weight, mean and sd in every entry", source)
    for i, (w, mu, s) in enumerate(zip(m.weights, m.means, m.sds), start=1):
        if not 0.0 < w <= 1.0:
            raise InputError(f"[[ct.positive]] entry {i}: weight = {w!r} must be in (0, 1]", source)
        if not s > 0:
            raise InputError(f"[[ct.positive]] entry {i}: sd = {s!r} must be positive", source)
        if not math.isfinite(mu):
            raise InputError(f"[[ct.positive]] entry {i}: mean = {mu!r} must be finite", source)
    total = float(sum(m.weights))
    if abs(total - 1.0) > 1e-6:
        raise InputError(f"[[ct.positive]] weight values sum to {total:g}; they must sum to 1",
                         source)


def _logsumexp(a, axis=-1):
    a = np.asarray(a, float)
    top = np.max(a, axis=axis, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.squeeze(top, axis) + np.log(np.sum(np.exp(a - top), axis=axis))


@lru_cache(maxsize=64)
def _prior_grid(model: CtModel, step: float):
    lo = min(m - TAIL_SD * s for m, s in zip(model.means, model.sds))
    hi = max(m + TAIL_SD * s for m, s in zip(model.means, model.sds))
    n = int(math.ceil((hi - lo) / step)) + 1
    nodes = lo + step * np.arange(n)
    logpdf = model.mixture_logpdf(nodes)
    mass = np.exp(logpdf - logpdf.max())
    mass /= mass.sum()
    nodes.setflags(write=False)
    mass.setflags(write=False)
    return nodes, mass


_PRUNE = 1e-15  # nodes of an effective-Ct distribution below this mass are dropped


@lru_cache(maxsize=8)
def _effective_all(model: CtModel, d_max: int):
    """Effective-Ct distributions for d = 1..d_max, one positive added at a time."""
    h = model.step
    nodes1, mass1 = _prior_grid(model, h)
    out = [(nodes1, mass1)]
    keep1 = mass1 > _PRUNE
    b_nodes, b_mass = nodes1[keep1], mass1[keep1]
    origin = nodes1[0]
    for _ in range(2, d_max + 1):
        a_nodes, a_mass = out[-1]
        keep = a_mass > _PRUNE
        v = model.combine(a_nodes[keep][:, None], b_nodes[None, :]).ravel()
        w = (a_mass[keep][:, None] * b_mass[None, :]).ravel()
        pos = (v - origin) / h
        base = math.floor(pos.min())
        j = np.floor(pos).astype(np.int64) - base
        frac = pos - np.floor(pos)
        size = int(j.max()) + 2
        mass = (np.bincount(j, w * (1.0 - frac), minlength=size)
                + np.bincount(j + 1, w * frac, minlength=size))
        mass /= mass.sum()
        nodes = origin + h * (base + np.arange(size))
        nz = np.flatnonzero(mass > 0)
        nodes, mass = nodes[nz[0]:nz[-1] + 1], mass[nz[0]:nz[-1] + 1]
        nodes.setflags(write=False)
        mass.setflags(write=False)
        out.append((nodes, mass))
    return tuple(out)


def _effective(model: CtModel, d: int):
    d_max = 1 << max(int(math.ceil(math.log2(d))), 4)  # cache in powers of two, at least 16
    return _effective_all(model, d_max)[d - 1]


@dataclass(frozen=True, eq=False)
class CtSensitivity:
    """The sensitivity a ``[ct]`` assay implies: Se(k, d) from :class:`CtModel`.

    Quacks like :class:`bayespool.assay.Sensitivity` (every binary consumer works unchanged) and
    keeps the model in ``ct``. Values are cached per (k, d).
    """

    ct: CtModel
    model: str = field(default="ct", init=False)

    def __call__(self, k, d):
        k, d = np.broadcast_arrays(np.asarray(k, dtype=float), np.asarray(d, dtype=np.int64))
        out = np.empty(k.shape)
        pairs, inverse = np.unique(np.stack([k.ravel(), d.ravel().astype(float)]), axis=1,
                                   return_inverse=True)
        values = np.array([_cached_se(self.ct, float(kk), int(dd)) for kk, dd in pairs.T])
        out.ravel()[:] = values[np.asarray(inverse).ravel()]
        return out

    def to_dict(self) -> dict:
        return self.ct.to_dict()

    def depends_on_count(self) -> bool:
        return True

    def check_pool_sizes(self, sizes, source=None) -> None:
        """Every pool size is covered by the load model."""


@lru_cache(maxsize=4096)
def _cached_se(model: CtModel, k: float, d: int) -> float:
    return float(model.implied_sensitivity(np.array([k]), np.array([d]))[0])
