"""Speed of the Dorfman simulation: 1000 runs of 1000 specimens, goal at most 10 s.

Measures side by side in one run: the vectorised batch path (all runs at once, in blocks), the per-run
protocol through a Tester (a loop over runs, vectorised within a run), and a plain Python loop over
specimens (timed on a few runs and scaled up, to show what vectorising buys). The array protocol
(per-run) is timed too. Usage: python3 scripts/bench_simulate.py [--runs R] [--samples N]
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


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=1000)
    ap.add_argument("--samples", type=int, default=1000)
    ap.add_argument("--pool-size", type=int, default=8)
    ap.add_argument("--prevalence", type=float, default=0.02)
    args = ap.parse_args()
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


if __name__ == "__main__":
    main()
