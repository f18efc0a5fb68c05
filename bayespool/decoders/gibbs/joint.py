"""Joint answers from the sampler: how many specimens are positive, and who explains each pool.

The distribution of the number of positives is the histogram of its value over every recorded sweep
of every chain; its 95% credible interval is equal-tailed. An ambiguity group is the set of members
of a positive pool that are neither called negative nor called positive, in a pool that no member
already explains (no member called positive); with two or more candidates, the kept joint draws say
how many of them are positive ("exactly one of S12, S47 is positive, probability 0.96"), which no
marginal probability can.
"""
from __future__ import annotations

import numpy as np


def credible_interval(dist: np.ndarray, level: float = 0.95) -> tuple[int, int]:
    """Equal-tailed interval [lo, hi] of a distribution on 0..len-1."""
    cdf = np.cumsum(dist)
    tail = (1.0 - level) / 2.0
    lo = int(np.searchsorted(cdf, tail * cdf[-1], side="right"))
    hi = int(np.searchsorted(cdf, (1.0 - tail) * cdf[-1], side="left"))
    return lo, min(hi, len(dist) - 1)


def count_summary(dist: np.ndarray, level: float = 0.95) -> dict:
    """Mean, mode and credible interval of the number of positives."""
    c = np.arange(len(dist))
    lo, hi = credible_interval(dist, level)
    return {"mean": float((c * dist).sum()), "mode": int(np.argmax(dist)),
            f"interval_{round(level * 100)}": [lo, hi]}


def _phrase(n_pos: int, names: list) -> str:
    listed = ", ".join(names)
    if n_pos == 0:
        return f"none of {listed} is positive"
    if n_pos == 1:
        return f"exactly one of {listed} is positive"
    if n_pos == len(names):
        return f"all of {listed} are positive"
    return f"exactly {n_pos} of {listed} are positive"


def ambiguity_groups(run, probability: np.ndarray, draws: np.ndarray, columns: np.ndarray,
                     negative_below: float, positive_above: float) -> list[dict]:
    """One entry per distinct group of undecided candidates of a positive pool.

    ``draws`` is (draws, len(columns)) uint8 over the specimens ``columns`` (indices into the run);
    pools with a member outside ``columns`` are skipped. Each entry has the pools, the specimens, the
    probability of each possible number of positives among them, and a sentence with the most probable
    number. Sorted by that probability, highest first.
    """
    if draws is None or len(draws) == 0:
        return []
    where = np.full(run.n_samples, -1, dtype=np.int64)
    where[columns] = np.arange(len(columns))
    p = np.asarray(probability)
    groups: dict[tuple, dict] = {}
    for t in np.flatnonzero(run.n_positive > 0):
        members = run.members(t)
        if (where[members] < 0).any() or (p[members] > positive_above).any():
            continue
        cand = members[(p[members] >= negative_below)]
        if len(cand) < 2:
            continue
        key = tuple(sorted(int(i) for i in cand))
        if key in groups:
            groups[key]["pools"].append(str(run.pool_ids[t]))
            continue
        k = draws[:, where[list(key)]].sum(axis=1, dtype=np.int64)
        dist = np.bincount(k, minlength=len(key) + 1) / len(k)
        best = int(np.argmax(dist))
        names = [str(run.sample_ids[i]) for i in key]
        groups[key] = {
            "pools": [str(run.pool_ids[t])], "samples": names,
            "distribution": [float(v) for v in dist],
            "most_probable": best, "probability": float(dist[best]),
            "at_least_one": float(1.0 - dist[0]),
            "text": f"{_phrase(best, names)}, probability {dist[best]:.2f}",
        }
    return sorted(groups.values(), key=lambda g: (-g["probability"], g["samples"]))
