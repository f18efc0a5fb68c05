"""Closed-loop simulation: draw cohorts, play a protocol through the assay model, summarise.

Statuses come from one random stream and readouts from another (both spawned from ``seed``), so a
protocol's batch path and its per-run path see the same cohorts. Protocols with a ``run_batch`` method
(vectorised over runs) use it unless ``batch=False``; the others are played one cohort at a time
through a :class:`~bayespool.simulation.protocol.Tester`.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..assay import DEFAULT_ASSAY, Assay
from ..errors import InputError
from ..validation import check_count, check_open_probability, seed_sequence
from .characteristics import ORDER, OperatingCharacteristics, summarise_runs
from ..design.specimens import specimens
from .cohort import Cohort, blocks, make_cohort
from .protocol import Protocol, Tester
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


def _progress_bar(progress, total: int):
    """A tqdm bar on stderr when asked; ``progress`` may be an existing bar to advance."""
    if progress is None or progress is False:
        return None, False
    if hasattr(progress, "update"):
        return progress, False
    import sys

    from tqdm import tqdm
    return tqdm(total=total, unit="run", file=sys.stderr, leave=False), True


def simulate(scheme, samples, *, prevalence: float | None = None, assay: Assay | None = None,
             runs: int = 1000, seed=None, progress=False, batch: bool = True,
             **options) -> Simulation:
    """Simulate ``runs`` cohorts of ``samples`` (N, a samples file or Specimens) under a protocol.

    ``scheme`` is a registered name (see :data:`bayespool.simulation.protocols.PROTOCOLS`) or a
    :class:`Protocol`; ``options`` go to its constructor (``pool_size``, ``rows``, ``cols``, ...).
    """
    protocol = scheme if isinstance(scheme, Protocol) else make_protocol(scheme, **options)
    cohort = samples if isinstance(samples, Cohort) else make_cohort(samples, prevalence)
    assay = DEFAULT_ASSAY if assay is None else assay
    runs = check_count(runs, "runs")
    seq = seed_sequence(seed)
    cohort_rng, test_rng = (np.random.default_rng(s) for s in seq.spawn(2))
    bar, own_bar = _progress_bar(progress, runs)
    frames = []
    try:
        for size in blocks(runs, cohort.n):
            truth = cohort.draw(size, cohort_rng)
            if batch and hasattr(protocol, "run_batch"):
                out = protocol.run_batch(truth, assay, test_rng)
                frames.append(summarise_runs(truth, out.calls, out.tests, out.rounds, out.draws))
            else:
                calls = np.empty_like(truth)
                draws = np.empty(truth.shape, dtype=np.int64)
                tests = np.empty(size, dtype=np.int64)
                rounds = np.empty(size, dtype=np.int64)
                for r in range(size):
                    o = protocol.run(Tester(truth[r], assay, test_rng), cohort.prior)
                    calls[r], draws[r], tests[r], rounds[r] = o.calls, o.draws, o.tests, o.rounds
                    if bar is not None and size > 1:
                        bar.update(1)
                if bar is not None and size == 1:
                    bar.update(1)
                frames.append(summarise_runs(truth, calls, tests, rounds, draws))
                continue
            if bar is not None:
                bar.update(size)
    finally:
        if own_bar:
            bar.close()
    frame = pd.concat(frames, ignore_index=True)
    frame.insert(0, "run", np.arange(1, len(frame) + 1))
    prev = cohort.prevalence
    expected = protocol.expected(cohort.n, prev, assay) if prev is not None else None
    notes = []
    if prev is None and type(protocol).expected is not Protocol.expected:
        notes.append("closed forms need one prevalence for all specimens: not shown")
    return Simulation(protocol.name, protocol.parameters(), assay, prev,
                      OperatingCharacteristics.from_runs(frame), frame, expected,
                      seed if isinstance(seed, (int, np.integer)) else None, notes)


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


def sweep(scheme: str, samples, *, prevalences=None, pool_sizes=None, assay: Assay | None = None,
          runs: int = 1000, seed=None, progress=False, **options) -> Sweep:
    """Simulate every combination of ``prevalences`` and ``pool_sizes`` (either may be None).

    Each point gets its own random streams spawned from ``seed`` (reproducible point by point).
    """
    prevs = [None] if prevalences is None else [check_open_probability(p, "prevalence") for p in prevalences]
    sizes = [options.pop("pool_size", None)] if pool_sizes is None else \
        [check_count(k, "pool_size") for k in pool_sizes]
    if pool_sizes is not None:
        accepted = accepted_options(scheme)
        if accepted is not None and "pool_size" not in accepted:
            raise InputError(f"the {scheme} scheme has no pool size to sweep over")
    spec = specimens(samples)
    if len(prevs) > 1 and spec.prior is not None and not np.isnan(spec.prior).any():
        raise InputError("every specimen has a prior in the samples file, so a sweep over "
                         "prevalences would change nothing")
    points = list(itertools.product(prevs, sizes))
    runs = check_count(runs, "runs")
    seeds = seed_sequence(seed).spawn(len(points))
    bar, own_bar = _progress_bar(progress, runs * len(points))
    results = []
    try:
        for (p, k), s in zip(points, seeds):
            sim = simulate(scheme, spec, prevalence=p, assay=assay, runs=runs, seed=s,
                           progress=bar if bar is not None else False, pool_size=k, **options)
            sim.seed = seed if isinstance(seed, (int, np.integer)) else None
            results.append(sim)
    finally:
        if own_bar:
            bar.close()
    return Sweep(results)
