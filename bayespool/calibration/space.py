"""The parameter vector of a fit: which parameters are free, which are fixed, and their scales.

Optimisers see only the free parameters on the unconstrained scale; the model sees the full vector.
A fixed value is converted exactly (a fixed se_max of 1 stays 1, logit = +inf), never clipped.
"""
from __future__ import annotations

import numpy as np
from scipy.special import logit

from ..errors import InputError
from .families import Param


class Space:
    """Free and fixed parameters of one fit."""

    def __init__(self, params: list[Param], fixed: dict | None = None, source: str | None = None):
        self.params = list(params)
        names = [p.name for p in self.params]
        fixed = dict(fixed or {})
        unknown = [n for n in fixed if n not in names]
        if unknown:
            raise InputError(f"cannot fix {unknown[0]!r}: this fit's parameters are "
                             f"{', '.join(names)}", source)
        self.fixed = {n: self.params[names.index(n)].check(v, source) for n, v in fixed.items()}
        self.free = [i for i, p in enumerate(self.params) if p.name not in self.fixed]
        self._base = np.zeros(len(self.params))
        for n, v in self.fixed.items():
            p = self.params[names.index(n)]
            with np.errstate(divide="ignore"):
                self._base[names.index(n)] = logit(v) if p.scale == "logit" else np.log(v)

    @property
    def names(self) -> list[str]:
        return [p.name for p in self.params]

    @property
    def free_params(self) -> list[Param]:
        return [self.params[i] for i in self.free]

    @property
    def n_free(self) -> int:
        return len(self.free)

    @property
    def bounds(self) -> list[tuple[float, float]]:
        return [(p.lower, p.upper) for p in self.free_params]

    def full(self, u_free) -> np.ndarray:
        """The full unconstrained vector from the free part."""
        u = self._base.copy()
        u[self.free] = u_free
        return u

    def natural(self, u_free) -> dict:
        """Natural values of every parameter (fixed ones exactly as given)."""
        u = self.full(u_free)
        out = {}
        for i, p in enumerate(self.params):
            out[p.name] = self.fixed[p.name] if p.name in self.fixed else float(p.natural(u[i]))
        return out

    def free_from_natural(self, values: dict) -> np.ndarray:
        return np.array([float(p.unconstrained(values[p.name])) for p in self.free_params])
