"""Speed of simulated studies, each figure measured side by side in one run.

Parts (``--parts``, default all):

- ``dorfman``: 1000 runs of 1000 specimens, goal at most 10 s: the vectorised batch path, the
  per-run protocol through a Tester, a plain Python loop over specimens (scaled from a few runs),
  and the array protocol.
- ``bayes``: seconds per 600-specimen cohort of the Bayesian loop at prevalence 2 % on one core
  (goal at most 0.25 s), with the memo of exact enumerations and without it (the same numbers,
  checked); ``--baseline DIR`` also times the same cohorts with the bayespool of another checkout
  (e.g. a clone of an older commit) in a subprocess, for the figure before the change.
- ``workers``: the same Bayesian study in-process and on a Dask LocalCluster of 2 worker
  processes (goal: at least 1.6 times faster on two cores), numbers checked identical.
- ``study``: dorfman, array, individual and bayes at six prevalences in one study (minutes).

Usage: python3 scripts/bench_simulate.py [--parts dorfman,bayes,workers,study] [--cohorts C]
[--baseline DIR]. Timings on a shared machine wander; the ratios are measured side by side.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # this tree's bayespool

from bayespool.assay import Assay, DilutionSensitivity  # noqa: E402
from bayespool.simulation import simulate  # noqa: E402

GOAL_SECONDS = 10.0


def python_loop_dorfman(truth, k, assay, rng):
    """The classic rule one specimen at a time (the slow reference the vectorised code replaces)."""
    n = len(truth)
    tests = 0
    calls = [False] * n
    for start in range(0, n, k):
        members = range(start, min(start + k, n))
        d = sum(bool(truth[i]) for i in members)
        tests += 1
        size = len(members)
        if rng.random() < float(assay.positive_probability(np.array([size]), np.array([d]))[0]):
            for i in members:
                if size == 1:
                    calls[i] = True
                    continue
                tests += 1
                p = float(assay.positive_probability(np.array([1]), np.array([int(truth[i])]))[0])
                calls[i] = rng.random() < p
    return calls, tests


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def bench_dorfman(args):
    assay = Assay(0.99, DilutionSensitivity(se_max=0.97, r50=40.0, slope=1.2))
    n, runs, k, p = args.samples, args.runs, args.pool_size, args.prevalence
    simulate("dorfman", 50, prevalence=p, assay=assay, runs=2, seed=0, pool_size=k)  # warm-up (imports)

    t_batch, sim = timed(lambda: simulate("dorfman", n, prevalence=p, assay=assay, runs=runs, seed=1, pool_size=k))
    t_run, sim_run = timed(lambda: simulate("dorfman", n, prevalence=p, assay=assay, runs=runs, seed=1,
                                            pool_size=k, batch=False))
    few = max(1, runs // 50)
    rng = np.random.default_rng(2)
    truths = rng.random((few, n)) < p
    t_loop, _ = timed(lambda: [python_loop_dorfman(t, k, assay, rng) for t in truths])
    t_loop *= runs / few
    t_array, _ = timed(lambda: simulate("array", n, prevalence=p, assay=assay, runs=runs, seed=1))

    print(f"Dorfman, {runs} runs of {n} specimens, pools of {k}, prevalence {p:g}, "
          f"{assay.describe()}")
    print(f"  batch path (vectorised over runs):   {t_batch:8.3f} s")
    print(f"  per-run protocol through a Tester:   {t_run:8.3f} s   "
          f"({t_run / t_batch:.1f}x the batch path)")
    print(f"  Python loop over specimens (scaled from {few} runs): {t_loop:8.1f} s   "
          f"({t_loop / t_batch:.0f}x the batch path)")
    print(f"  array protocol (8 x 12, per run):    {t_array:8.3f} s")
    print(f"  goal: at most {GOAL_SECONDS:g} s -> batch path at {t_batch / GOAL_SECONDS:.1%} of the "
          f"budget, per-run path at {t_run / GOAL_SECONDS:.1%}: "
          f"{'met' if max(t_batch, t_run) <= GOAL_SECONDS else 'NOT met'}")
    c, e = sim.characteristics, sim.expected
    print(f"  tests per specimen {c.estimate['tests_per_sample']:.4f} ± "
          f"{c.mcse['tests_per_sample']:.4f} (closed form {e['tests_per_sample']:.4f}); "
          f"per-run path {sim_run.characteristics.estimate['tests_per_sample']:.4f}")


BAYES_GOAL = 0.25      # seconds per 600-specimen cohort at 2 %, one core
SPEEDUP_GOAL = 1.6     # 2 workers against in-process on two cores
BAYES_CELL = dict(samples=600, prevalence=0.02)

BASELINE_CODE = """
import sys, time, json
sys.path.insert(0, sys.argv[1])
from bayespool.simulation import simulate
simulate("bayes", 600, prevalence=0.02, runs=1, seed=0)  # imports, cached kernels
t0, c0 = time.perf_counter(), time.process_time()
sim = simulate("bayes", 600, prevalence=0.02, runs=int(sys.argv[2]), seed=int(sys.argv[3]))
print(json.dumps({"wall": time.perf_counter() - t0, "cpu": time.process_time() - c0,
                  "tests": sim.characteristics.estimate["tests_per_sample"]}))
"""


def cpu_timed(fn):
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return time.perf_counter() - t0, time.process_time() - c0, out


def bench_bayes(args):
    n, p, runs = BAYES_CELL["samples"], BAYES_CELL["prevalence"], args.cohorts
    simulate("bayes", n, prevalence=p, runs=1, seed=0)  # imports, cached kernels
    w1, c1, fast = cpu_timed(lambda: simulate("bayes", n, prevalence=p, runs=runs, seed=args.seed))
    w0, c0, plain = cpu_timed(lambda: simulate("bayes", n, prevalence=p, runs=runs, seed=args.seed,
                                               remember=False))
    same = fast.runs_frame.equals(plain.runs_frame)
    print(f"Bayesian loop, {runs} cohorts of {n} specimens at prevalence {p:g}, default assay, "
          "one core (seconds per cohort: wall / CPU)")
    print(f"  with the memo of exact enumerations:    {w1 / runs:6.3f} / {c1 / runs:6.3f}")
    print(f"  without it (every component enumerated): {w0 / runs:6.3f} / {c0 / runs:6.3f}   "
          f"({c0 / c1:.1f}x the CPU time)")
    print(f"  identical per-run counts with and without: {same}")
    if args.baseline:
        import json
        import subprocess
        r = subprocess.run([sys.executable, "-c", BASELINE_CODE, args.baseline, str(runs),
                            str(args.seed)], capture_output=True, text=True, check=True)
        base = json.loads(r.stdout.strip().splitlines()[-1])
        print(f"  baseline checkout {args.baseline}: {base['wall'] / runs:6.3f} / "
              f"{base['cpu'] / runs:6.3f}   ({base['cpu'] / c1:.1f}x the CPU time; tests per "
              f"specimen {base['tests']:.4f} against "
              f"{fast.characteristics.estimate['tests_per_sample']:.4f} here: a checkout from "
              "before per-cohort streams draws other cohorts from the same seed)")
    print(f"  goal: at most {BAYES_GOAL:g} s per cohort on one core: "
          f"{'met' if c1 / runs <= BAYES_GOAL else 'NOT met'} (CPU time)")


def _cpu_seconds() -> float:
    """CPU seconds used so far by this process (run on each worker through ``client.run``)."""
    import resource
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def bench_workers(args):
    from bayespool.simulation.engine import cluster_client
    n, p, runs = BAYES_CELL["samples"], BAYES_CELL["prevalence"], 4 * args.cohorts
    simulate("bayes", n, prevalence=p, runs=1, seed=0)
    t_in, c_in, serial = cpu_timed(lambda: simulate("bayes", n, prevalence=p, runs=runs,
                                                    seed=args.seed))
    with cluster_client(workers=2) as client:
        client.run(lambda: simulate("bayes", n, prevalence=p, runs=1, seed=0))  # workers import and load
        before = client.run(_cpu_seconds)
        t_two, c_here, remote = cpu_timed(lambda: simulate("bayes", n, prevalence=p, runs=runs,
                                                           seed=args.seed, client=client))
        after = client.run(_cpu_seconds)
    c_workers = sum(after[w] - before[w] for w in after)
    print(f"Bayesian loop, {runs} cohorts of {n} at {p:g}: in-process {t_in:.2f} s, Dask "
          f"LocalCluster of 2 processes {t_two:.2f} s (cluster started and warmed before timing)")
    print(f"  speed-up {t_in / t_two:.2f}x (goal {SPEEDUP_GOAL:g}x); identical numbers: "
          f"{remote.runs_frame.equals(serial.runs_frame)}")
    print(f"  CPU seconds: in-process {c_in:.2f}; on the cluster {c_workers:.2f} in the workers + "
          f"{c_here:.2f} here (pilot, scheduling, results), i.e. "
          f"{(c_workers + c_here) / c_in:.2f}x the in-process work; on a busy machine the wall "
          "ratio understates what two free cores give")


def bench_study(args):
    from bayespool.simulation import sweep
    from bayespool.simulation.engine import cluster_client
    prevs = [0.005, 0.01, 0.02, 0.05, 0.1, 0.15]
    schemes = ["individual", "dorfman", "array", "bayes"]
    runs = args.cohorts
    with cluster_client(workers=args.workers) if args.workers else cluster_client() as client:
        t, study = timed(lambda: sweep(schemes, 600, prevalences=prevs, pool_sizes=[8],
                                       runs=runs, seed=args.seed, client=client))
    where = f"{args.workers} workers" if args.workers else "in-process"
    print(f"{len(schemes)} schemes x {len(prevs)} prevalences, {runs} cohorts of 600 per cell, "
          f"{where}: {t:.1f} s")
    cols = ["scheme", "prevalence", "tests_per_sample", "sensitivity", "specificity"]
    print(study.table[cols].to_string(index=False))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--parts", default="dorfman,bayes,workers,study")
    ap.add_argument("--runs", type=int, default=1000, help="dorfman: runs")
    ap.add_argument("--samples", type=int, default=1000, help="dorfman: specimens")
    ap.add_argument("--pool-size", type=int, default=8)
    ap.add_argument("--prevalence", type=float, default=0.02)
    ap.add_argument("--cohorts", type=int, default=20,
                    help="bayes: cohorts timed (workers: four times as many; study: per cell)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--baseline", metavar="DIR", help="bayes: another checkout to time too")
    ap.add_argument("--workers", type=int, help="study: run it on a LocalCluster of N")
    args = ap.parse_args()
    parts = {"dorfman": bench_dorfman, "bayes": bench_bayes, "workers": bench_workers,
             "study": bench_study}
    for name in args.parts.split(","):
        parts[name](args)
        print()


if __name__ == "__main__":
    main()
