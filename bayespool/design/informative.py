"""Informative Dorfman testing: pools of specimens of similar risk.

McMahan, Tebbs & Bilder (2012), Informative Dorfman screening, Biometrics 68, 287-296: when each
specimen has its own risk (for example fitted by ``bayespool regress``), sorting specimens by risk
before pooling keeps high-risk specimens together, so fewer low-risk pools turn positive. With a
fixed pool size the sorted specimens are cut into blocks; without one, the sorted order is cut
where the expected number of tests is least (their pool-specific optimal Dorfman), by dynamic
programming over block ends: a block of k >= 2 costs 1 + k (1 - prod(1 - p_i)) expected tests
under an error-free test (Dorfman 1943), a block of one costs 1.
"""
from __future__ import annotations

import numpy as np

from ..errors import InputError


def risk_order(prior: np.ndarray | None, source) -> np.ndarray:
    """Specimen order by ascending risk (stable); every specimen needs a prior."""
    if prior is None or np.isnan(prior).any():
        raise InputError("`by_risk` needs a prior for every specimen in the samples file (for "
                         "example the fitted risks of a group testing regression)", source)
    return np.argsort(prior, kind="stable")


def optimal_blocks(p_sorted: np.ndarray, max_size: int) -> np.ndarray:
    """Block boundaries (CSR pointer) of the sorted risks that minimise the expected tests."""
    n = len(p_sorted)
    log_q = np.concatenate([[0.0], np.cumsum(np.log1p(-p_sorted))])
    best = np.full(n + 1, np.inf)
    best[0] = 0.0
    back = np.zeros(n + 1, dtype=np.int64)
    for end in range(1, n + 1):
        for k in range(1, min(max_size, end) + 1):
            start = end - k
            cost = 1.0 if k == 1 else 1.0 + k * -np.expm1(log_q[end] - log_q[start])
            if best[start] + cost < best[end]:
                best[end], back[end] = best[start] + cost, start
    cuts = [n]
    while cuts[-1] > 0:
        cuts.append(int(back[cuts[-1]]))
    return np.array(cuts[::-1], dtype=np.int64)
