"""Random streams of a study: one per cohort, spawned from the seed, so results never depend on
where or in what order a cohort was played.

A cell of a study (one scheme at one setting) owns a :class:`numpy.random.SeedSequence`; cohort
``r`` of the cell owns child ``r`` of it (``SeedSequence(seed).spawn(runs)[r]``), and that child
spawns two streams: the cohort's hidden statuses and the readouts its tests draw. A cohort played
alone, in a block with others, in-process or on any Dask worker draws the same numbers.
"""
from __future__ import annotations

import numpy as np


def child(seq: np.random.SeedSequence, index: int) -> np.random.SeedSequence:
    """Child ``index`` of ``seq``: the same as ``seq.spawn(index + 1)[index]`` on a fresh
    ``seq``, built directly so that a block of cohorts need not spawn its predecessors."""
    return np.random.SeedSequence(seq.entropy, spawn_key=tuple(seq.spawn_key) + (int(index),),
                                  pool_size=seq.pool_size)


def cohort_streams(seq: np.random.SeedSequence, run: int):
    """(statuses, readouts) generators of cohort ``run`` (0-based) of the cell seeded by ``seq``."""
    status, readout = child(seq, run).spawn(2)
    return np.random.default_rng(status), np.random.default_rng(readout)
