"""Closed-loop simulation: draw cohorts, play a protocol through the assay model, summarise.

Every cohort has its own two streams (statuses, readouts) spawned from ``seed``
(:mod:`.streams`), so a protocol's batch path and its per-run path see the same cohorts and draw the
same readouts, and a study gives the same numbers in-process, on N local workers or on a remote Dask
cluster (:mod:`.engine`). Protocols with a ``run_batch`` method (vectorised over runs) use it unless
``batch=False``; the others are played one cohort at a time through a
:class:`~bayespool.simulate.protocol.Tester`.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..assay import DEFAULT_ASSAY, Assay
from ..design.base import check_count
from ..errors import InputError
from ..run import check_prevalence
from .characteristics import ORDER, OperatingCharacteristics
from ..design.specimens import specimens
from .cells import Cell
from .cohort import Cohort, make_cohort
from .engine import run_blocks
from .protocol import Protocol
from .streams import as_seed_sequence
from .protocols import accepted_options, make_protocol


@dataclass
class Simulation:
    """One protocol at one setting: operating characteristics, per-run counts, closed forms."""

    scheme: str
    parameters: dict
    assay: Assay
    prevalence: float | None
    characteristics: OperatingCharacteristics
    runs_frame: pd.DataFrame
    expected: dict | None = None
    seed: int | None = None
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        out = {"scheme": self.scheme, **self.parameters, "prevalence": self.prevalence,
               "assay": self.assay.describe(), "seed": self.seed}
        out.update(self.characteristics.to_dict())
        if self.expected is not None:
            out["expected"] = {k: self.expected[k] for k in ("tests_per_sample", "sensitivity",
                                                            "specificity", "ppv", "npv")}
        if self.notes:
            out["notes"] = list(self.notes)
        return out


def _cell(scheme, cohort: Cohort, assay: Assay, runs: int, seq, batch: bool, options,
          setting=None) -> Cell:
    protocol = scheme if isinstance(scheme, Protocol) else make_protocol(scheme, **options)
    return Cell(protocol, cohort, assay, runs, seq, batch, dict(setting or {}))


def _simulation(cell: Cell, frame: pd.DataFrame, seed) -> Simulation:
    protocol, cohort, assay = cell.protocol, cell.cohort, cell.assay
    prev = cohort.prevalence
    expected = protocol.expected(cohort.n, prev, assay) if prev is not None else None
    notes = []
    if prev is None and type(protocol).expected is not Protocol.expected:
        notes.append("closed forms need one prevalence for all specimens: not shown")
    return Simulation(protocol.name, protocol.parameters(), assay, prev,
                      OperatingCharacteristics.from_runs(frame), frame, expected,
                      seed if isinstance(seed, (int, np.integer)) else None, notes)


def simulate(scheme, samples, prevalence: float | None = None, assay: Assay | None = None,
             runs: int = 1000, seed=None, progress=False, batch: bool = True, *, client=None,
             on_estimate=None, **options) -> Simulation:
    """Simulate ``runs`` cohorts of ``samples`` (N, a samples file or Specimens) under a protocol.

    Parameters
    ----------
    scheme : str or Protocol
        A registered name (see :data:`bayespool.simulate.protocols.PROTOCOLS`) or a protocol
        object; ``options`` go to its constructor (``pool_size``, ``rows``, ``cols``, ...).
    seed : int, SeedSequence or None
        Cohort ``r`` draws from ``SeedSequence(seed).spawn(runs)[r]``, so the numbers are the same
        wherever and in whatever blocks the cohorts run.
    client : dask.distributed.Client, optional
        Play the cohorts as tasks on this Dask cluster (default: in this process).
    progress : bool
        A bar on stderr (cohorts done of total, time left).
    on_estimate : callable, optional
        Called with the pilot's :class:`~bayespool.simulate.engine.Estimate` before the study.
    """
    cohort = samples if isinstance(samples, Cohort) else make_cohort(samples, prevalence)
    assay = DEFAULT_ASSAY if assay is None else assay
    runs = check_count(runs, "--runs")
    cell = _cell(scheme, cohort, assay, runs, as_seed_sequence(seed), batch, options)
    [frame] = run_blocks([cell], client=client, progress=progress, on_estimate=on_estimate)
    return _simulation(cell, frame, seed)


@dataclass
class Sweep:
    """Simulations over a grid of prevalences and/or pool sizes, and their table."""

    results: list

    @property
    def table(self) -> pd.DataFrame:
        rows = []
        for sim in self.results:
            row = {"prevalence": sim.prevalence, **sim.parameters}
            c = sim.characteristics
            for k in ORDER:
                row[k] = c.estimate[k]
                row[f"{k}_se"] = c.mcse[k]
            if sim.expected is not None:
                for k in ("tests_per_sample", "sensitivity", "specificity"):
                    row[f"expected_{k}"] = sim.expected[k]
            rows.append(row)
        return pd.DataFrame(rows)

    def to_dict(self) -> list:
        return [s.to_dict() for s in self.results]


def sweep(scheme: str, samples, prevalences=None, pool_sizes=None, assay: Assay | None = None,
          runs: int = 1000, seed=None, progress=False, *, client=None, on_estimate=None,
          **options) -> Sweep:
    """Simulate every combination of ``prevalences`` and ``pool_sizes`` (either may be None).

    Each point is a cell of the study with its own seed spawned from ``seed`` (point ``j`` gets
    ``SeedSequence(seed).spawn(points)[j]``); all cells' cohorts run as one batch of tasks, on
    ``client`` when given (see :func:`simulate`).
    """
    prevs = [None] if prevalences is None else [check_prevalence(p) for p in prevalences]
    sizes = [options.pop("pool_size", None)] if pool_sizes is None else \
        [check_count(k, "--pool-size") for k in pool_sizes]
    if pool_sizes is not None:
        accepted = accepted_options(scheme)
        if accepted is not None and "pool_size" not in accepted:
            raise InputError(f"the {scheme} scheme has no pool size to sweep over")
    spec = specimens(samples)
    if len(prevs) > 1 and spec.prior is not None and not np.isnan(spec.prior).any():
        raise InputError("every specimen has a prior in the samples file, so a sweep over "
                         "prevalences would change nothing")
    points = list(itertools.product(prevs, sizes))
    runs = check_count(runs, "--runs")
    seeds = as_seed_sequence(seed).spawn(len(points))
    cells = [_cell(scheme, make_cohort(spec, p), DEFAULT_ASSAY if assay is None else assay, runs,
                   s, True, {**options, "pool_size": k}) for (p, k), s in zip(points, seeds)]
    frames = run_blocks(cells, client=client, progress=progress, on_estimate=on_estimate)
    return Sweep([_simulation(c, f, seed) for c, f in zip(cells, frames)])
