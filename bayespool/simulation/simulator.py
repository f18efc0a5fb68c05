"""Closed-loop simulation: draw cohorts, play a protocol through the assay model, summarise.

Every cohort has its own two streams (statuses, readouts) spawned from ``seed``
(:mod:`.streams`), so a protocol's batch path and its per-run path see the same cohorts and draw the
same readouts, and a study gives the same numbers in-process, on N local workers or on a remote Dask
cluster (:mod:`.engine`). Protocols with a ``run_batch`` method (vectorised over runs) use it unless
``batch=False``; the others are played one cohort at a time through a
:class:`~bayespool.simulation.protocol.Tester`.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..assay import DEFAULT_ASSAY, Assay
from ..errors import InputError
from ..result_protocol import Result
from ..validation import check_count, check_open_probability, seed_sequence
from .characteristics import ORDER, OperatingCharacteristics
from ..design.specimens import specimens
from .cells import Cell
from .cohort import Cohort, make_cohort
from .engine import run_blocks
from .protocol import Protocol
from .protocols import accepted_options, make_protocol


@dataclass(repr=False)
class Simulation(Result):
    """One protocol at one setting: operating characteristics, per-run counts, closed forms.

    ``to_frame()`` has one row per characteristic (index ``characteristic``): the estimate and its
    Monte Carlo standard error; ``runs_frame`` keeps the per-run counts.

    Examples
    --------
    >>> import bayespool
    >>> sim = bayespool.simulate("individual", 30, prevalence=0.1, runs=10, seed=1)
    >>> float(sim.to_frame().loc["tests_per_sample", "estimate"])
    1.0
    """

    scheme: str
    parameters: dict
    assay: Assay
    prevalence: float | None
    characteristics: OperatingCharacteristics
    runs_frame: pd.DataFrame
    expected: dict | None = None
    seed: int | None = None
    notes: list = field(default_factory=list)
    setting: dict = field(default_factory=dict)  # what a study sweeps besides the parameters

    def to_frame(self) -> pd.DataFrame:
        return self.characteristics.table().set_index("characteristic")

    def __str__(self) -> str:
        from .text import simulation_text
        return simulation_text(self)

    def _brief(self) -> str:
        return (f"{self.scheme!r}, {self.characteristics.runs} runs of "
                f"{self.characteristics.specimens} specimens, prevalence={self.prevalence}")

    def summary(self) -> dict:
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
                      seed if isinstance(seed, (int, np.integer)) else None, notes,
                      dict(cell.setting))


def simulate(scheme, samples, *, prevalence: float | None = None, assay: Assay | None = None,
             runs: int = 1000, seed=None, progress=False, batch: bool = True, client=None,
             on_estimate=None, **options) -> Simulation:
    """Simulate ``runs`` cohorts of ``samples`` (N, a samples file or Specimens) under a protocol.

    Parameters
    ----------
    scheme : str or Protocol
        A registered name (see :data:`bayespool.simulation.protocols.PROTOCOLS`) or a protocol
        object; ``options`` go to its constructor (``pool_size``, ``rows``, ``cols``, ...).
    seed : int, SeedSequence or None
        Cohort ``r`` draws from ``SeedSequence(seed).spawn(runs)[r]``, so the numbers are the same
        wherever and in whatever blocks the cohorts run.
    client : dask.distributed.Client, optional
        Play the cohorts as tasks on this Dask cluster (default: in this process).
    progress : bool
        A bar on stderr (cohorts done of total, time left).
    on_estimate : callable, optional
        Called with the pilot's :class:`~bayespool.simulation.engine.Estimate` before the study.
    samples : int, str or Specimens
        Specimens per cohort, or a samples file whose ``prior`` column is used.
    prevalence : float, optional
        Prior of every specimen (without priors in the samples file).
    assay : Assay, optional
        The assay that draws the readouts (default: constant Se 0.95, Sp 0.99).
    runs : int
        Simulated cohorts.

    Returns
    -------
    Simulation
        The operating characteristics with Monte Carlo standard errors (``to_frame()`` indexed by
        characteristic) and the closed forms where known.

    Raises
    ------
    InputError
        An unknown scheme or a bad option (naming the parameter).

    References
    ----------
    Closed forms beside the estimates: Dorfman (1943); Kim et al. (2007), Biometrics 63(4).

    Examples
    --------
    >>> import bayespool
    >>> sim = bayespool.simulate("dorfman", 40, prevalence=0.05, pool_size=4, runs=20, seed=1)
    >>> sim.to_frame().index[:3].tolist()
    ['tests_per_sample', 'sensitivity', 'specificity']
    """
    cohort = samples if isinstance(samples, Cohort) else make_cohort(samples, prevalence)
    assay = DEFAULT_ASSAY if assay is None else assay
    runs = check_count(runs, "runs")
    cell = _cell(scheme, cohort, assay, runs, seed_sequence(seed), batch, options)
    [frame] = run_blocks([cell], client=client, progress=progress, on_estimate=on_estimate)
    return _simulation(cell, frame, seed)


@dataclass(repr=False)
class Sweep(Result):
    """A study: simulations over schemes and settings (one cell each), and their table.

    ``to_frame()`` is ``table`` with one row per setting (index ``setting``); ``summary()`` is
    ``{"points": [...]}``, one simulation's summary (plus its setting) per point.

    Examples
    --------
    >>> import bayespool
    >>> study = bayespool.sweep("individual", 30, prevalences=[0.05, 0.1], runs=10, seed=1)
    >>> len(study.summary()["points"]), study.to_frame().index.name
    (2, 'setting')
    """

    results: list

    @property
    def table(self) -> pd.DataFrame:
        """One row per cell: scheme, setting (prevalence, assay, thresholds), the protocol's
        parameters, each characteristic with its Monte Carlo standard error (``_se``), and the
        closed form where one exists (``expected_``)."""
        rows = []
        for sim in self.results:
            row = {"scheme": sim.scheme, "prevalence": sim.prevalence, **sim.setting,
                   **sim.parameters}
            c = sim.characteristics
            for k in ORDER:
                row[k] = c.estimate[k]
                row[f"{k}_se"] = c.mcse[k]
            if sim.expected is not None:
                for k in ("tests_per_sample", "sensitivity", "specificity"):
                    row[f"expected_{k}"] = sim.expected[k]
            rows.append(row)
        return pd.DataFrame(rows)

    def to_frame(self) -> pd.DataFrame:
        frame = self.table
        frame.index.name = "setting"
        return frame

    def summary(self) -> dict:
        return {"points": [{**s.summary(), **s.setting} for s in self.results]}

    def __str__(self) -> str:
        from .text import simulation_text, sweep_text
        if len(self.results) == 1:
            return simulation_text(self.results[0])
        return sweep_text(self)

    def _brief(self) -> str:
        schemes = ", ".join(dict.fromkeys(s.scheme for s in self.results))
        return f"{len(self.results)} setting(s) of {schemes}"


def _as_list(value):
    if value is None:
        return None
    if isinstance(value, (str, Protocol, Assay)) or np.isscalar(value):
        return [value]
    return list(value)


def _assay_items(assay, assays) -> list[tuple[str | None, Assay]]:
    """(label, assay) pairs: ``assays`` (a list, or a dict label -> Assay) swept, else ``assay``."""
    if assays is None:
        return [(None, DEFAULT_ASSAY if assay is None else assay)]
    if assay is not None:
        raise InputError("give assay or assays, not both")
    items = list(assays.items()) if isinstance(assays, dict) else \
        [(a.describe(), a) for a in assays]
    if not items:
        raise InputError("assays is empty")
    return [(str(label), a) for label, a in items]


def _takes(scheme, option: str) -> bool:
    if isinstance(scheme, Protocol):
        return False
    accepted = accepted_options(scheme)
    return accepted is None or option in accepted


SWEPT = ("pool_size", "negative_below", "positive_above")  # protocol options a study may sweep


def sweep(scheme, samples, *, prevalences=None, pool_sizes=None, assay: Assay | None = None,
          runs: int = 1000, seed=None, progress=False, assays=None, negative_below=None,
          positive_above=None, client=None, on_estimate=None, **options) -> Sweep:
    """A study: every scheme at every combination of the swept settings.

    Parameters
    ----------
    scheme : str, Protocol or a list of them
        One scheme or several (``["dorfman", "array", "bayes"]``), compared in one table.
    prevalences, pool_sizes : lists, optional
        Swept values (None: the single value in ``options``). A pool size sweeps only the schemes
        that take one; so do ``negative_below`` and ``positive_above`` (one value or a list).
    assays : list of Assay, or dict label -> Assay, optional
        Swept assays (instead of ``assay``).
    seed, client, progress, on_estimate
        As in :func:`simulate`. Cells at the same prevalence share their cohorts: cohort ``r`` at
        prevalence ``i`` draws from child ``r`` of ``SeedSequence(seed).spawn(prevalences)[i]``
        whatever the scheme, pool size, assay or thresholds (common random numbers, so
        differences between schemes are measured on the same specimens). All cells' cohorts go
        out as one batch of tasks.

    Returns
    -------
    Sweep
        One simulation per setting (``to_frame()``: one row per setting).

    Raises
    ------
    InputError
        A scheme that is not registered, or a swept value out of range (naming the parameter).

    References
    ----------
    Common random numbers for comparing simulated systems (e.g. Law & Kelton, Simulation Modeling
    and Analysis; from memory); closed forms as in :func:`simulate`.

    Examples
    --------
    >>> import bayespool
    >>> study = bayespool.sweep(["dorfman", "individual"], 40, prevalences=[0.02, 0.05],
    ...                         pool_size=4, runs=10, seed=1)
    >>> len(study.to_frame()), sorted(set(study.to_frame()["scheme"]))
    (4, ['dorfman', 'individual'])
    """
    schemes = _as_list(scheme)
    if not schemes:
        raise InputError("give at least one scheme")
    prevs = [None] if prevalences is None else [check_open_probability(p, "prevalence") for p in
                                               _as_list(prevalences)]
    swept = {"pool_size": [options.pop("pool_size", None)] if pool_sizes is None else
             [check_count(k, "pool_size") for k in _as_list(pool_sizes)],
             "negative_below": _as_list(negative_below) or [None],
             "positive_above": _as_list(positive_above) or [None]}
    for option, values in swept.items():
        if len(values) > 1 and not any(_takes(s, option) for s in schemes):
            names = ", ".join(str(getattr(s, "name", s)) for s in schemes)
            what = "pool size" if option == "pool_size" else option.replace("_", " ")
            raise InputError(f"the {names} scheme{'s' if len(schemes) > 1 else ''} "
                             f"{'have' if len(schemes) > 1 else 'has'} no {what} to sweep over")
    spec = specimens(samples)
    if len(prevs) > 1 and spec.prior is not None and not np.isnan(spec.prior).any():
        raise InputError("every specimen has a prior in the samples file, so a sweep over "
                         "prevalences would change nothing")
    assay_items = _assay_items(assay, assays)
    runs = check_count(runs, "runs")
    seeds = seed_sequence(seed).spawn(len(prevs))
    cohorts = [make_cohort(spec, p) for p in prevs]
    cells = []
    for s in schemes:
        values = [swept[o] if _takes(s, o) else [None] for o in SWEPT]
        for i, (label, a) in itertools.product(range(len(prevs)), assay_items):
            for combo in itertools.product(*values):
                chosen = {o: v for o, v in zip(SWEPT, combo) if v is not None}
                setting = {} if label is None else {"assay": label}
                setting.update({o: v for o, v in chosen.items() if o != "pool_size"
                                and len(swept[o]) > 1})
                cells.append(_cell(s, cohorts[i], a, runs, seeds[i], True,
                                   {**options, **chosen}, setting))
    frames = run_blocks(cells, client=client, progress=progress, on_estimate=on_estimate)
    return Sweep([_simulation(c, f, seed) for c, f in zip(cells, frames)])
