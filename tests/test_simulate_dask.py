"""Studies on Dask give the same numbers as in-process: a LocalCluster of two worker processes, a
scheduler and a worker started as separate processes on 127.0.0.1, and a worker killed mid-study.

The reference is the in-process run of the same seed; identity holds because every cohort draws
from its own stream, child r of ``numpy.random.SeedSequence(seed).spawn(runs)`` (numpy's documented
way to make independent parallel streams). Every cluster here is shut down within the test.
"""
from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.simulation import Protocol, simulate, sweep
from bayespool.simulation.cells import Cell, play
from bayespool.simulation.cohort import make_cohort
from bayespool.simulation.protocols import make_protocol
from bayespool.simulation.protocols.dorfman import DorfmanTesting
from bayespool.simulation.streams import child

distributed = pytest.importorskip("distributed") if not os.environ.get("CI") else \
    __import__("distributed")  # CI must run these, never skip them

ROOT = Path(__file__).resolve().parents[1]
ASSAY = Assay(0.98, DilutionSensitivity(se_max=0.96, r50=30.0, slope=1.3))
BAYES = {"tests": 12, "max_pool_size": 8, "n_draws": 200}


class SlowDorfman(Protocol):
    """Dorfman played one cohort at a time, slowly, so a worker can be killed mid-study."""

    name = "slow-dorfman"

    def __init__(self, pool_size=4, pause=0.02):
        self.inner, self.pause = DorfmanTesting(pool_size=pool_size), pause

    def run(self, tester, prior):
        time.sleep(self.pause)
        return self.inner.run(tester, prior)


def _local_cluster(workers=2):
    import logging

    from distributed import Client, LocalCluster
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                           dashboard_address=":0", silence_logs=logging.ERROR)
    return cluster, Client(cluster)


@pytest.fixture(scope="module")
def client():
    cluster, c = _local_cluster(2)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


def test_cohort_streams_are_spawned_children():
    # the documented construction: child r == SeedSequence(seed).spawn(runs)[r]
    parent = np.random.SeedSequence(42)
    spawned = np.random.SeedSequence(42).spawn(7)
    for r in range(7):
        assert child(parent, r).generate_state(4).tolist() == spawned[r].generate_state(4).tolist()


def test_blocks_do_not_change_the_numbers():
    # a cell played in one block, cohort by cohort, or in uneven blocks gives identical rows
    cell = Cell(make_protocol("bayes", **BAYES), make_cohort(48, 0.05), ASSAY, 5,
                np.random.SeedSequence(3))
    whole = play(cell, 0, 5)
    import pandas as pd
    parts = pd.concat([play(cell, 0, 1), play(cell, 1, 4), play(cell, 4, 5)], ignore_index=True)
    assert whole.equals(parts)
    # the vectorised Dorfman path with per-cohort streams equals the per-run rule run by run
    a = simulate("dorfman", 97, prevalence=0.08, assay=ASSAY, runs=40, seed=5, pool_size=6, batch=True)
    b = simulate("dorfman", 97, prevalence=0.08, assay=ASSAY, runs=40, seed=5, pool_size=6, batch=False)
    assert a.runs_frame.equals(b.runs_frame)


def test_local_cluster_gives_the_in_process_numbers(client):
    serial = simulate("bayes", 48, prevalence=0.05, assay=ASSAY, runs=6, seed=7, **BAYES)
    remote = simulate("bayes", 48, prevalence=0.05, assay=ASSAY, runs=6, seed=7, client=client, **BAYES)
    assert remote.runs_frame.equals(serial.runs_frame)
    assert remote.characteristics.estimate == serial.characteristics.estimate
    s1 = sweep("array", 96, prevalences=[0.01, 0.05], assay=ASSAY, runs=30, seed=2)
    s2 = sweep("array", 96, prevalences=[0.01, 0.05], assay=ASSAY, runs=30, seed=2, client=client)
    assert s1.table.equals(s2.table)


def test_a_worker_killed_mid_study_changes_nothing():
    serial = simulate(SlowDorfman(), 60, prevalence=0.1, assay=ASSAY, runs=60, seed=11, batch=False)
    cluster, c = _local_cluster(2)
    try:
        pids = c.run(os.getpid)  # worker address -> process id
        killed = []

        class KillAfterFirst:
            """A progress sink that kills one worker process once the cluster has finished a
            block, i.e. in the middle of the study."""

            def update(self, n):
                self.calls = getattr(self, "calls", 0) + 1
                if self.calls == 2 and not killed:  # call 1 is the in-process pilot
                    pid = next(iter(pids.values()))
                    os.kill(pid, signal.SIGKILL)
                    killed.append(pid)

        remote = simulate(SlowDorfman(), 60, prevalence=0.1, assay=ASSAY, runs=60, seed=11, batch=False,
                          client=c, progress=KillAfterFirst())
        assert killed, "no worker was killed: the study finished before the kill"
        assert remote.runs_frame.equals(serial.runs_frame)
        # the nanny restarted the killed worker: a process id changed
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline and killed[0] in c.run(os.getpid).values():
            time.sleep(0.2)
        assert killed[0] not in c.run(os.getpid).values()
    finally:
        c.close()
        cluster.close()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _command(*args):
    return [sys.executable, "-m", "bayespool", *map(str, args)]


STUDY = ("simulate", "--scheme", "array", "--samples", 96, "--prevalence", "0.02,0.1",
         "--runs", 40, "--rows", 8, "--cols", 12, "--seed", 4, "--json")


def _run(args, timeout=180):
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run(_command(*args), capture_output=True, text=True, env=env, cwd=ROOT,
                          timeout=timeout)


def test_cli_workers_and_an_external_scheduler_give_the_in_process_numbers(tmp_path, cli):
    serial = cli(*STUDY)
    assert serial.code == 0, serial.err
    local = _run(STUDY + ("--workers", 2))
    assert local.returncode == 0, local.stderr
    # the cells are identical; only the audit trail (command line, date) differs
    assert json.loads(local.stdout)["points"] == json.loads(serial.out)["points"]

    env = {**os.environ, "PYTHONPATH": str(ROOT)}  # the workers import this tree's bayespool
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    procs = []
    try:
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
             "--port", str(port), "--no-dashboard"], env=env, cwd=tmp_path,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", address, "--host", "127.0.0.1",
             "--nworkers", "1", "--nthreads", "1", "--no-dashboard"], env=env, cwd=tmp_path,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        from distributed import Client
        with Client(address, timeout=60) as c:
            c.wait_for_workers(1, timeout=60)
        remote = _run(STUDY + ("--scheduler", address))
        assert remote.returncode == 0, remote.stderr
        assert json.loads(remote.stdout)["points"] == json.loads(serial.out)["points"]
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in reversed(procs):
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait(timeout=10)


def test_unreachable_scheduler_and_bad_workers_are_one_line_errors(cli):
    r = cli("simulate", "--scheme", "individual", "--samples", 10, "--prevalence", 0.1,
            "--runs", 2, "--scheduler", f"tcp://127.0.0.1:{_free_port()}")
    assert r.code == 2 and "Dask scheduler" in r.err and "Traceback" not in r.err
    assert len([line for line in r.err.splitlines() if "error" in line]) == 1
    r = cli("simulate", "--scheme", "individual", "--samples", 10, "--prevalence", 0.1,
            "--runs", 2, "--workers", 0)
    assert r.code == 2 and "--workers" in r.err
    r = cli("simulate", "--scheme", "individual", "--samples", 10, "--prevalence", 0.1,
            "--runs", 2, "--workers", 2, "--scheduler", "tcp://127.0.0.1:1")
    assert r.code == 2 and "not allowed with" in r.err


def _our_tasks(dask_scheduler):
    """Keys of the study's blocks that the scheduler still holds (run on the scheduler)."""
    return [str(k) for k in dask_scheduler.tasks if str(k).startswith("bayespool-cohorts-")]


def test_ctrl_c_during_a_study_cancels_its_futures(client):
    class InterruptAfterFirst:
        """A progress sink that raises KeyboardInterrupt (what Ctrl-C raises) once the cluster
        has finished a block, with most blocks still queued or running."""

        calls = 0

        def update(self, n):
            self.calls += 1
            if self.calls == 2:  # call 1 is the in-process pilot
                raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt) as interrupted:
        simulate(SlowDorfman(pause=0.05), 60, prevalence=0.1, assay=ASSAY, runs=400, seed=3,
                 batch=False, client=client, progress=InterruptAfterFirst())
    # the traceback still references the futures, so without a cancel the scheduler would hold
    # (and go on computing) the remaining blocks, about 10 s of work on two workers
    deadline = time.monotonic() + 5
    while client.run_on_scheduler(_our_tasks) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not client.run_on_scheduler(_our_tasks)
    assert interrupted.traceback  # held until here on purpose
    # the cluster is still usable afterwards
    again = simulate("dorfman", 40, prevalence=0.1, assay=ASSAY, runs=4, seed=3, batch=False,
                     pool_size=4, client=client)
    assert again.runs_frame.equals(simulate("dorfman", 40, prevalence=0.1, assay=ASSAY, runs=4,
                                            seed=3, batch=False, pool_size=4).runs_frame)


def test_ctrl_c_on_the_command_line_exits_130_and_writes_nothing(tmp_path):
    # a terminal's Ctrl-C sends SIGINT to the whole foreground process group: the command and
    # its LocalCluster's processes alike
    out = tmp_path / "study.csv"
    out.write_text("an earlier study\n")
    report, plots = tmp_path / "study.html", tmp_path / "figures"
    plots.mkdir()
    args = _command("simulate", "--scheme", "bayes", "--samples", 300, "--prevalence", 0.02,
                    "--runs", 2000, "--seed", 1, "--workers", 2, "--out", out, "--report", report,
                    "--plots", plots)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen(args, env=env, cwd=tmp_path, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        seen = []
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:  # the forecast comes just before the blocks go out
            line = proc.stderr.readline()
            if not line:
                break
            seen.append(line)
            if "estimated duration" in line:
                break
        assert seen and "estimated duration" in seen[-1], "".join(seen)
        time.sleep(1.0)  # blocks are running on the workers
        assert proc.poll() is None, "the study ended before the interrupt"
        os.killpg(proc.pid, signal.SIGINT)
        stdout, stderr = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=10)
    assert proc.returncode == 130, stderr
    assert "interrupted" in stderr
    assert out.read_text() == "an earlier study\n"
    assert not report.exists() and not any(plots.iterdir())
    assert sorted(p.name for p in tmp_path.iterdir()) == ["figures", "study.csv"]  # no temporary
    # file left behind
    # and no worker process outlives the command
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            os.killpg(proc.pid, 0)
        except ProcessLookupError:
            break
        time.sleep(0.2)
    else:
        os.killpg(proc.pid, signal.SIGKILL)
        pytest.fail("processes of the interrupted command were still running 30 s later")
