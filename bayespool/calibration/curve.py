"""The fitted sensitivity curve Se(r) against dilution r = k / d, with a pointwise band.

The band comes from the large-sample normal distribution of the estimates on the unconstrained
scale (inverse information): draws of the parameters are pushed through the curve and the pointwise
quantiles taken, so the band respects 0 <= Se <= 1. Parameters estimated on a bound are held there.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .families import Family
from .space import Space


@dataclass
class CurveModel:
    family: Family
    space: Space
    u: np.ndarray            # free parameters, unconstrained
    covariance: np.ndarray   # of the free parameters; zero rows for those held on a bound

    def values(self, u_free, dilution) -> np.ndarray:
        r = np.asarray(dilution, dtype=float)
        se, _, _ = self.family.evaluate(self.space.full(u_free), r, np.ones_like(r))
        return se

    def curve(self, dilution, level: float = 0.95, draws: int = 2000, seed: int = 0):
        r = np.asarray(dilution, dtype=float)
        est = self.values(self.u, r)
        lower = upper = est
        if len(self.u) and draws > 0 and np.any(self.covariance):
            rng = np.random.default_rng(seed)
            w, v = np.linalg.eigh(0.5 * (self.covariance + self.covariance.T))
            root = v * np.sqrt(np.clip(w, 0.0, None))
            sims = self.u + rng.standard_normal((draws, len(self.u))) @ root.T
            curves = np.array([self.values(s, r) for s in sims])
            a = (1.0 - level) / 2.0
            lower, upper = np.quantile(curves, [a, 1.0 - a], axis=0)
        return pd.DataFrame({"dilution": r, "sensitivity": est, "lower": lower, "upper": upper})


def covariance(info: np.ndarray, held: np.ndarray) -> np.ndarray:
    """Inverse information over the parameters not held on a bound (zeros for the held ones)."""
    n = len(info)
    cov = np.zeros((n, n))
    keep = ~np.asarray(held, dtype=bool)
    if keep.any():
        sub = info[np.ix_(keep, keep)]
        cov[np.ix_(keep, keep)] = np.linalg.pinv(sub)
    return cov
