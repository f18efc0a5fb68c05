"""Distributions of the number of positive specimens, combined across independent parts."""
from __future__ import annotations

import numpy as np

_TINY = 1e-300


def _trim(dist: np.ndarray, offset: int, tol: float):
    top = dist.max()
    if dist[0] > tol * top and dist[-1] > tol * top:  # both ends kept: nothing to cut
        return dist, offset
    keep = np.flatnonzero(dist > tol * top)
    lo, hi = keep[0], keep[-1] + 1
    return dist[lo:hi], offset + lo


def convolve_counts(parts, tol: float = 1e-17):
    """Distribution of a sum of independent counts, each given as a probability vector on 0..m.

    Convolves in a balanced tree and trims tails below ``tol`` of the peak, so the cost follows the
    support of the result rather than the number of specimens. Returns (dist, offset): P(sum =
    offset + j) = dist[j].
    """
    items = [_trim(np.asarray(p, dtype=float), 0, tol) for p in parts if len(p)]
    if not items:
        return np.ones(1), 0
    while len(items) > 1:
        nxt = []
        for a in range(0, len(items) - 1, 2):
            (d1, o1), (d2, o2) = items[a], items[a + 1]
            d = np.convolve(d1, d2)
            d /= d.sum()
            nxt.append(_trim(d, o1 + o2, tol))
        if len(items) % 2:
            nxt.append(items[-1])
        items = nxt
    return items[0]


def count_distribution(parts, n_total: int, tol: float = 1e-17) -> np.ndarray:
    """Full-length P(number positive = c), c = 0..n_total, from independent parts."""
    dist, offset = convolve_counts(parts, tol)
    out = np.zeros(n_total + 1)
    out[offset:offset + len(dist)] = dist
    return out


def bernoulli_parts(p: np.ndarray):
    """Each independent specimen as a part [1 - p, p]."""
    p = np.asarray(p, dtype=float)
    return list(np.stack([1.0 - p, p], axis=1))
