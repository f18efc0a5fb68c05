"""Where a study's blocks of cohorts run: in this process, or as tasks on a Dask cluster.

``run_blocks(cells, client=...)`` cuts every cell into blocks (:meth:`Cell.ranges`), plays them
(:func:`bayespool.simulation.cells.play`) in-process or as futures of a
``dask.distributed.Client``, and returns each cell's per-run counts in run order. Dask reschedules
the blocks of a worker that dies; since a block's numbers depend only on its cell and its runs,
the study completes with the same numbers. Interrupting (Ctrl-C) cancels the outstanding futures.

Before the blocks go out, a short pilot plays the first cohorts of each cell in this process and
times them; the estimate of the whole study's duration goes to ``on_estimate`` (the command line
prints it before a long study). The pilot's cohorts are part of the results, not thrown away.
"""
from __future__ import annotations

import math
import time
import uuid
from contextlib import contextmanager
from dataclasses import dataclass

import pandas as pd

from ..errors import InputError
from ..progress import progress_bar
from .cells import Cell, play

PILOT_SECONDS = 2.0     # in-process pilot budget per study (at least one cohort per cell)
TASK_SECONDS = 0.5      # aim for blocks of about this long on a cluster (scheduling overhead ~1 ms)


@dataclass
class Estimate:
    """The pilot's forecast: seconds for the whole study on ``workers`` workers."""

    seconds: float
    cohorts: int
    pilot_cohorts: int
    workers: int
    cluster: bool = False

    def text(self) -> str:
        where = (f"on {self.workers} worker{'s' if self.workers != 1 else ''}" if self.cluster
                 else "in this process")
        return (f"estimated duration: {format_seconds(self.seconds)} for {self.cohorts:,} "
                f"simulated cohorts {where} (from a timed pilot of {self.pilot_cohorts})")


def format_seconds(s: float) -> str:
    if s < 60:
        return f"about {max(1, round(s))} s"
    if s < 3600:
        return f"about {s / 60:.0f} min"
    return f"about {s / 3600:.1f} h"


def client_workers(client) -> int:
    """Worker threads of a Dask client's cluster (at least 1)."""
    if client is None:
        return 1
    info = client.scheduler_info()
    return max(1, sum(int(w.get("nthreads", 1)) for w in info.get("workers", {}).values()))


def _pilot(cells: list[Cell], budget: float):
    """Play the first cohorts of each cell here, timed. Returns (done frames per cell, the next
    run per cell, seconds per cohort per cell). Vectorised protocols: one block. Per-run
    protocols: cohort 0, and cohort 1 while the budget lasts and always for the first cell of a
    protocol (its first cohort carries one-time costs: imports, loading compiled kernels); the
    rate is the last cohort's."""
    frames, nxt, rate = [], [], []
    started = time.perf_counter()
    seen = set()
    for cell in cells:
        if cell.vectorised:
            a, b = cell.ranges()[0]
        else:
            first = type(cell.protocol) not in seen
            b = 2 if cell.runs > 1 and (first or time.perf_counter() - started < budget) else 1
            a = b - 1
            seen.add(type(cell.protocol))
        done = [play(cell, 0, a)] if a else []
        t0 = time.perf_counter()
        done.append(play(cell, a, b))
        rate.append((time.perf_counter() - t0) / (b - a))
        frames.append(done)
        nxt.append(b)
    return frames, nxt, rate


def _tasks(cells, nxt, rate, workers):
    """(cell index, start, stop) for what the pilot left, cut so a cluster stays busy."""
    out = []
    for i, (cell, start) in enumerate(zip(cells, nxt)):
        left = cell.runs - start
        if left <= 0:
            continue
        if cell.vectorised:
            ranges = [(a, b) for a, b in cell.ranges() if a >= start]
        else:
            per = max(1, int(TASK_SECONDS / max(rate[i], 1e-6)))
            if workers > 1:  # at least about four blocks per worker over the cell
                per = min(per, max(1, math.ceil(left / (4 * workers))))
            ranges = [(a, min(a + per, cell.runs)) for a in range(start, cell.runs, per)]
        out.extend((i, a, b) for a, b in ranges)
    return out


def run_blocks(cells: list[Cell], *, client=None, progress=False, on_estimate=None,
               pilot_seconds: float = PILOT_SECONDS) -> list[pd.DataFrame]:
    """Per-run counts of every cell (one DataFrame per cell, in run order)."""
    workers = client_workers(client)
    total = sum(c.runs for c in cells)
    frames, nxt, rate = _pilot(cells, pilot_seconds)
    piloted = sum(nxt)
    if on_estimate is not None:
        left = sum(r * (c.runs - s) for c, s, r in zip(cells, nxt, rate))
        on_estimate(Estimate(left / workers, total, piloted, workers, client is not None))
    tasks = _tasks(cells, nxt, rate, workers)
    # a bar when asked (cohorts done of total, time left); ``progress`` may be a caller's bar
    bar = progress_bar(False if progress is None else progress, total, desc="cohorts", unit="run")
    own = bar is not progress
    try:
        bar.update(piloted)
        if client is None:
            results = []
            for i, a, b in tasks:
                results.append(play(cells[i], a, b))
                bar.update(b - a)
        else:
            results = _on_cluster(client, cells, tasks, bar)
    finally:
        if own:
            bar.close()
    for (i, _, _), frame in zip(tasks, results):
        frames[i].append(frame)
    return [pd.concat(f, ignore_index=True) for f in frames]


def _on_cluster(client, cells, tasks, bar):
    """Submit every block as a future, follow them as they finish, gather in task order."""
    from distributed import as_completed
    tag = uuid.uuid4().hex[:12]
    # every block carries its (small) cell, so a block lost with a worker can run anywhere again
    futures = [client.submit(play, cells[i], a, b, key=f"bayespool-cohorts-{tag}-{n}",
                             pure=False)
               for n, (i, a, b) in enumerate(tasks)]
    size = {f.key: b - a for f, (_, a, b) in zip(futures, tasks)}
    try:
        for fut in as_completed(futures):
            if fut.status == "error":
                fut.result()  # raises the task's error here
            bar.update(size[fut.key])
        return client.gather(futures)
    except BaseException:
        client.cancel(futures, force=True)
        raise


CONNECT_SECONDS = 10


def _check_reachable(address: str) -> None:
    """Fail at once, with one line, when nothing listens at a tcp:// scheduler address (Dask
    itself would retry until its timeout)."""
    import socket
    from urllib.parse import urlsplit
    parts = urlsplit(address if "://" in address else f"tcp://{address}")
    if parts.scheme != "tcp" or parts.port is None:
        return  # other protocols: leave it to Dask
    try:
        socket.create_connection((parts.hostname, parts.port), timeout=CONNECT_SECONDS).close()
    except OSError as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address}: "
                         f"{exc.strerror or exc}") from None


@contextmanager
def cluster_client(workers: int | None = None, scheduler: str | None = None):
    """A Dask client for ``workers`` local processes (a LocalCluster) or for the scheduler at
    ``scheduler``; None when neither is given (in-process). Closed on leaving."""
    if workers is None and scheduler is None:
        yield None
        return
    if workers is not None and scheduler is not None:
        raise InputError("give workers or scheduler, not both")
    try:
        from distributed import Client, LocalCluster
    except ImportError:  # pragma: no cover - a runtime dependency
        raise InputError("running on a cluster needs dask[distributed] (pip install "
                         "'dask[distributed]')") from None
    import logging
    if scheduler is not None:
        _check_reachable(scheduler)
        try:
            client = Client(scheduler, timeout=CONNECT_SECONDS)
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from None
        try:
            yield client
        finally:
            client.close()
        return
    if int(workers) < 1:
        raise InputError(f"workers must be at least 1, got {workers}")
    cluster = LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True,
                           dashboard_address=":0", silence_logs=logging.ERROR)
    client = Client(cluster)
    try:
        yield client
    finally:
        client.close()
        cluster.close()
