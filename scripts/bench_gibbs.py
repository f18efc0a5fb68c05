"""Benchmark of the Gibbs sampler: site updates per second per core, and ESS per second vs PyMC.

1. Site updates per second on one core (one chain, one numba thread) at 10,000 and 1,000,000
   specimens: every specimen in two pools of 10 (two random partitions), prevalence 1%, readouts
   simulated through the assay. Goal: at least 2e7 per second per core.
2. When PyMC is installed: the same model (500 specimens, 100 pools of 10, each specimen in two
   pools) sampled by PyMC's BinaryGibbsMetropolis and by bayespool, side by side in this run:
   bulk effective samples per second of sampling time, median over the specimens whose draws vary,
   both computed by the same ESS function on the indicator draws. Goal: at least 1000x PyMC.
   PyMC is not a dependency of bayespool; without it the comparison is skipped and says so.

The data are simulated (invented) for the benchmark only. Usage: python scripts/bench_gibbs.py
[--quick] [--skip-pymc]
"""
from __future__ import annotations

import argparse
import os
import sys
import time
import warnings

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.decoders.gibbs import GibbsSampler, SingleSiteMove, ess  # noqa: E402
from bayespool.run import Run  # noqa: E402

ASSAY = Assay(0.99, ConstantSensitivity(0.95))
PREVALENCE = 0.01


def simulated_run(n, pool_size=10, partitions=2, seed=0):
    """Each specimen in ``partitions`` pools of ``pool_size``; readouts drawn through the assay."""
    rng = np.random.default_rng(seed)
    truth = rng.random(n) < PREVALENCE
    pools, members = [], []
    n_pools = 0
    for r in range(partitions):
        perm = np.arange(n) if r == 0 else rng.permutation(n)
        pools.append(np.arange(n) // pool_size + n_pools)
        members.append(perm)
        n_pools += -(-n // pool_size)
    pools, members = np.concatenate(pools), np.concatenate(members)
    size = np.bincount(pools, minlength=n_pools)
    d = np.bincount(pools, weights=truth[members], minlength=n_pools).astype(np.int64)
    result = ASSAY.draw_readouts(size, d, rng).astype(np.int64)
    run = Run.from_arrays(pools, members, n, n_pools, PREVALENCE, np.arange(n_pools), result)
    return run, truth, pools, members, result


def site_rates(n):
    """(single-site move alone, full sweep with pool swaps) site updates per second, one core."""
    import numba
    run, *_ = simulated_run(n)
    lik_ptr, loglik = run.log_likelihood(ASSAY)
    numba.set_num_threads(1)
    rates = []
    for moves in ([SingleSiteMove()], None):
        sampler = GibbsSampler(run, lik_ptr, loglik, chains=1, moves=moves)
        rates.append(sampler.throughput(max(3, int(3e7 // n)), seed=1))
    numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)
    return rates, len(sampler.model.swap_pools)


def bayespool_ess_rate(run, chains, sweeps, warmup, seed=1):
    """A fixed number of sweeps per chain on one core, every draw kept (as for PyMC)."""
    import numba
    lik_ptr, loglik = run.log_likelihood(ASSAY)
    sampler = GibbsSampler(run, lik_ptr, loglik, chains=chains)
    sampler.sample(seed=0, warmup=50, min_sweeps=50, max_sweeps=50)  # compile / load the cache
    numba.set_num_threads(1)
    t0 = time.perf_counter()
    res = sampler.sample(seed=seed, warmup=warmup, min_sweeps=sweeps, max_sweeps=sweeps,
                         max_draws=chains * sweeps)
    seconds = time.perf_counter() - t0
    numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)
    draws = res.draws.reshape(chains, -1, run.n_samples).astype(float)
    return draws, seconds, res


def pymc_ess_rate(pools, members, result, n, n_pools, chains, draws, tune, seed=1):
    import pymc as pm
    import pytensor.tensor as pt
    se, sp = ASSAY.sensitivity.value, ASSAY.specificity
    with pm.Model():
        x = pm.Bernoulli("x", p=PREVALENCE, shape=n)
        d = pt.zeros(n_pools)
        d = pt.inc_subtensor(d[pools], x[members])
        p_pos = pt.switch(d > 0, se, 1.0 - sp)
        pm.Bernoulli("y", p=p_pos, observed=result)
        step = pm.BinaryGibbsMetropolis([x])
        t0 = time.perf_counter()
        idata = pm.sample(draws=draws, tune=tune, chains=chains, cores=1, step=step,
                          random_seed=seed, progressbar=False, compute_convergence_checks=False)
        wall = time.perf_counter() - t0
    # PyMC's own sampling time (tuning and drawing, without model compilation) when it says it
    seconds = float(idata.posterior.attrs.get("sampling_time", wall))
    return np.asarray(idata.posterior["x"].values, dtype=float), seconds


def varying(draws):
    return draws.reshape(-1, draws.shape[2]).std(axis=0) > 0


def median_ess(draws, which):
    """Median bulk ESS of the indicator draws over the specimens ``which``."""
    return float(np.median(ess(draws[:, :, which])))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer PyMC draws")
    ap.add_argument("--skip-pymc", action="store_true", help="skip the PyMC comparison")
    args = ap.parse_args(argv)
    print("bayespool Gibbs sampler benchmark (simulated data)")
    print("1. site updates per second on one core (one chain, one thread), goal >= 2e7; "
          "'with swaps' also spends time on the pool-swap move each sweep")
    for n in (10_000, 1_000_000):
        (alone, full), n_swap = site_rates(n)
        print(f"   {n:>9,} specimens: {alone:.3g} site updates/s/core "
              f"({alone / 2e7:.2f}x the goal); with swaps in {n_swap:,} positive pools: "
              f"{full:.3g} ({full / 2e7:.2f}x)")

    n, chains = 500, 4
    run, _, pools, members, result = simulated_run(n, pool_size=10, partitions=2, seed=2)
    print(f"2. ESS per second on one core, {n} specimens, {run.n_pools} pools of 10, {chains} "
          "chains; each sampler runs a fixed number of iterations after tuning and keeps every "
          "draw; the time covers tuning and drawing (bayespool: also its diagnostics), not "
          "compilation")
    ours, our_s, res = bayespool_ess_rate(run, chains, sweeps=4000 if args.quick else 20000,
                                          warmup=500)
    our_ess = median_ess(ours, varying(ours))
    print(f"   bayespool: 500 + {res.diagnostics['sweeps']} sweeps per chain in {our_s:.3f} s, "
          f"median bulk ESS {our_ess:.0f} over {varying(ours).sum()} varying specimens: "
          f"{our_ess / our_s:.4g} ESS/s")
    if args.skip_pymc:
        print("   PyMC comparison skipped (--skip-pymc)")
        return 0
    try:
        import pymc  # noqa: F401
    except ImportError:
        print("   PyMC is not installed: comparison skipped (pip install pymc to run it)")
        return 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import logging
        logging.getLogger("pymc").setLevel(logging.ERROR)
        draws, tune = (100, 50) if args.quick else (500, 250)
        theirs, their_s = pymc_ess_rate(pools, members, result, n, run.n_pools, chains, draws,
                                        tune)
    both = varying(ours) & varying(theirs)  # compare on the same specimens
    our_ess, their_ess = median_ess(ours, both), median_ess(theirs, both)
    print(f"   PyMC {pymc.__version__} BinaryGibbsMetropolis: {tune} + {draws} draws per chain in "
          f"{their_s:.1f} s sampling time")
    print(f"   on the {both.sum()} specimens whose draws vary in both: median bulk ESS "
          f"bayespool {our_ess:.0f} ({our_ess / our_s:.4g}/s), PyMC {their_ess:.0f} "
          f"({their_ess / their_s:.4g}/s)")
    ratio = (our_ess / our_s) / (their_ess / their_s)
    print(f"   ratio bayespool / PyMC: {ratio:.3g}x ESS per second (goal >= 1000x)")
    p_ours = ours.reshape(-1, n).mean(axis=0)
    p_theirs = theirs.reshape(-1, n).mean(axis=0)
    print(f"   agreement of the two posteriors' means: max abs difference "
          f"{np.abs(p_ours - p_theirs).max():.3f} (PyMC's Monte Carlo error included)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
