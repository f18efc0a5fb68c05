"""The unit of work of a study: a block of cohorts of one cell, played anywhere.

A :class:`Cell` is one protocol at one setting (cohort, assay, seed, number of runs). ``play(cell,
start, stop)`` plays cohorts ``start..stop-1`` of it and returns their per-run counts. It is a plain
function of picklable arguments, so the same call runs in-process or as a task on a Dask worker,
and since every cohort draws from its own spawned streams (:mod:`.streams`) the counts do not depend
on how the runs were cut into blocks or where each block ran.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..assay import Assay
from .characteristics import summarise_runs
from .cohort import Cohort, blocks
from .protocol import Protocol, Tester
from .streams import cohort_streams


@dataclass
class Cell:
    """One protocol at one setting of a study; ``setting`` labels it in the study's table."""

    protocol: Protocol
    cohort: Cohort
    assay: Assay
    runs: int
    seed: np.random.SeedSequence
    batch: bool = True
    setting: dict = field(default_factory=dict)

    @property
    def vectorised(self) -> bool:
        """Whether the protocol plays many cohorts at once (``run_batch``)."""
        return self.batch and hasattr(self.protocol, "run_batch")

    def ranges(self, per_task: int | None = None) -> list[tuple[int, int]]:
        """The cell's runs cut into (start, stop) blocks: vectorised protocols in blocks of bounded
        memory, the others in blocks of ``per_task`` cohorts (default 1)."""
        if self.vectorised:
            sizes = blocks(self.runs, self.cohort.n)
        else:
            step = max(1, int(per_task or 1))
            sizes = [min(step, self.runs - s) for s in range(0, self.runs, step)]
        stops = np.cumsum(sizes)
        return [(int(b - s), int(b)) for s, b in zip(sizes, stops)]


def play(cell: Cell, start: int, stop: int) -> pd.DataFrame:
    """Per-run counts of cohorts ``start..stop-1`` of ``cell`` (``run`` numbered from 1)."""
    streams = [cohort_streams(cell.seed, r) for r in range(start, stop)]
    truth = np.stack([cell.cohort.draw(1, s)[0] for s, _ in streams]) if streams else \
        np.zeros((0, cell.cohort.n), dtype=bool)
    readers = [t for _, t in streams]
    if cell.vectorised:
        out = cell.protocol.run_batch(truth, cell.assay, readers)
        frame = summarise_runs(truth, out.calls, out.tests, out.rounds, out.draws)
    else:
        size = len(readers)
        calls = np.empty_like(truth)
        draws = np.empty(truth.shape, dtype=np.int64)
        tests = np.empty(size, dtype=np.int64)
        rounds = np.empty(size, dtype=np.int64)
        for r in range(size):
            o = cell.protocol.run(Tester(truth[r], cell.assay, readers[r]), cell.cohort.prior)
            calls[r], draws[r], tests[r], rounds[r] = o.calls, o.draws, o.tests, o.rounds
        frame = summarise_runs(truth, calls, tests, rounds, draws)
    frame.insert(0, "run", np.arange(start + 1, stop + 1))
    return frame
