"""Benchmark: planning a 96-test batch for 10,000 specimens (goal: at most 10 s).

Three cases, each timed warm (kernels compiled by a first call): planning given the decoded
posterior (the goal), and decoding plus planning; the planning is broken down into posterior draws,
candidates and the greedy batch:
  first stage   10,000 specimens never tested, prevalence 1%;
  after pools   10,000 specimens read in pools of 8 (Dorfman's first stage), prevalence 1%;
  after pools   10,000 specimens read in pools of 16, prevalence 2%.
Prints each time beside the 10 s goal, as a ratio. Data are simulated for the benchmark.

    python3 scripts/bench_plan.py [--samples 10000] [--tests 96] [--draws 1000]
"""
from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.decoders import decode  # noqa: E402
from bayespool.decoders.graph import components  # noqa: E402
from bayespool.planning import plan  # noqa: E402
from bayespool.planning.candidates import generate  # noqa: E402
from bayespool.planning.draws import posterior_draws  # noqa: E402
from bayespool.planning.greedy import select_batch  # noqa: E402
from bayespool.planning.information import readout_table  # noqa: E402
from bayespool.run import Run  # noqa: E402

GOAL = 10.0
ASSAY = Assay(0.99, ConstantSensitivity(0.95))


def make_run(n, prevalence, pool_size, rng):
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(n)]})
    if not pool_size:
        return Run.from_frames(pd.DataFrame({"pool": [], "sample": []}), None, samples,
                               prevalence)
    owner = np.arange(n) // pool_size
    run = Run.from_arrays(owner, np.arange(n), n, int(owner.max()) + 1, prevalence)
    truth = rng.random(n) < prevalence
    pos = np.bincount(owner, weights=truth).astype(np.int64)
    res = ASSAY.draw_readouts(run.pool_size, pos, rng)
    return run.with_readouts(np.arange(run.n_pools), res.astype(int))


def breakdown(run, tests, n_draws, seed):
    times = {}
    t = time.perf_counter()
    post = decode(run, ASSAY)
    times["decode"] = time.perf_counter() - t
    t = time.perf_counter()
    draws = posterior_draws(run, ASSAY, post, n_draws, np.random.default_rng(seed))
    times["draws"] = time.perf_counter() - t
    t = time.perf_counter()
    comps = components(run)
    qtab = readout_table(ASSAY, max(16, int(run.pool_size.max()) if run.n_pools else 1))
    cands = generate(run, post.probability, post.undecided(), comps, 16, ~np.isnan(qtab[:, 0]))
    times["candidates"] = time.perf_counter() - t
    t = time.perf_counter()
    xt = np.ascontiguousarray(draws.T)
    w = np.full(xt.shape[1], 1.0 / xt.shape[1])
    select_batch(xt, w, cands, comps.sample_label, comps.sizes.astype(np.int64), qtab, tests,
                 np.full(run.n_samples, 10**9), 22, 0.001)
    times["greedy"] = time.perf_counter() - t
    return times, len(cands), len(post.undecided())


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=10_000)
    ap.add_argument("--tests", type=int, default=96)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    cases = [("first stage, p=1%", 0.01, 0), ("after pools of 8, p=1%", 0.01, 8),
             ("after pools of 16, p=2%", 0.02, 16)]
    print(f"planning {args.tests} tests for {args.samples} specimens, {args.draws} posterior "
          f"draws, goal {GOAL:g} s")
    t = time.perf_counter()
    plan(make_run(200, 0.02, 8, rng), ASSAY, tests=8, seed=0)  # compile (or load cached) kernels
    print(f"  first call (kernel compile or cache load): {time.perf_counter() - t:.2f} s")
    for name, p, k in cases:
        run = make_run(args.samples, p, k, rng)
        t = time.perf_counter()
        post = decode(run, ASSAY)
        t_decode = time.perf_counter() - t
        t = time.perf_counter()
        result = plan(run, ASSAY, posterior=post, tests=args.tests, n_draws=args.draws, seed=args.seed)
        total = time.perf_counter() - t
        parts, n_cand, n_und = breakdown(run, args.tests, args.draws, args.seed)
        detail = ", ".join(f"{k} {v:.2f}" for k, v in parts.items() if k != "decode")
        print(f"  {name:<25} plan {total:6.2f} s = {total / GOAL:.3f} x goal; with decoding "
              f"{t_decode + total:6.2f} s = {(t_decode + total) / GOAL:.3f} x goal")
        print(f"  {'':<25} ({result.n_tests} tests, {n_und} undecided, {n_cand} candidates; "
              f"{detail})")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"  peak resident memory {peak:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
