"""Speed of decoding with Ct readouts against binary decoding, belief propagation path.

Random design: every specimen in 2 pools of 16, prevalence 0.5 %, one readout per pool drawn from
the Ct model (pooled Ct with dilution, noise, censoring; false amplifications at 1 - Sp). The same
run is decoded by BP twice: with the ``[ct]`` assay (per-pool likelihoods integrated over the
positives' Cts) and with a binary table assay holding the implied Se(k, d) on the positive/negative
results. Prints both wall times and their ratio, measured side by side in one process.

    python scripts/bench_ct_decode.py [--sizes 10000,1000000]
"""
from __future__ import annotations

import argparse
import dataclasses
import time

import numpy as np
import pandas as pd

from bayespool.assay import Assay, TableSensitivity, sensitivity_table
from bayespool.decoders import decode
from bayespool.run import Run

ASSAY = {"specificity": 0.995, "ct": {
    "cutoff": 40.0, "cycles_per_doubling": 1.0, "noise_sd": 0.5, "detection_max": 0.99,
    "false_positive_low": 30.0, "positive": [{"weight": 1.0, "mean": 27.0, "sd": 4.0}]}}
K, W, PREV = 16, 2, 0.005


def make_run(n, assay, rng):
    m = assay.ct
    n_pools = n * W // K
    pools = np.concatenate([rng.permutation(n_pools * K) // K for _ in range(W)])[: n * W]
    samples = np.tile(np.arange(n), W)
    truth_ct = np.where(rng.random(n) < PREV, m.draw_individual_ct(n, rng), np.nan)
    amount = np.bincount(pools, np.nan_to_num(np.exp2(-truth_ct[samples]), nan=0.0), n_pools)
    size = np.bincount(pools, minlength=n_pools)
    with np.errstate(divide="ignore"):
        pool_ct = m.pool_shift(size) - np.log2(amount)
    y = m.draw_readout_ct(np.where(amount > 0, pool_ct, np.inf), rng)
    fp = (amount == 0) & (rng.random(n_pools) < 1 - assay.specificity)
    y[fp] = rng.uniform(m.false_positive_low, m.cutoff, fp.sum())
    result = np.isfinite(y).astype(np.int64)
    ct = pd.DataFrame({"pool": np.arange(n_pools), "result": result, "ct": y})
    return Run.from_arrays(pools, samples, n, n_pools, PREV, np.arange(n_pools), result,
                           readout_ct=ct)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="10000,1000000")
    args = ap.parse_args()
    assay = Assay.from_dict(ASSAY)
    tab = sensitivity_table(assay, [K])
    binary = Assay(assay.specificity, TableSensitivity(tuple(
        (int(r.pool_size), int(r.positives), float(r.value)) for r in tab.itertuples())))
    rng = np.random.default_rng(1)
    warm = make_run(2000, assay, rng)
    decode(warm, assay, method="bp")
    decode(warm, binary, method="bp")  # compile kernels before timing
    for n in (int(v) for v in args.sizes.split(",")):
        run = make_run(n, assay, rng)
        t0 = time.perf_counter()
        post_ct = decode(run, assay, method="bp")
        t1 = time.perf_counter()
        plain = dataclasses.replace(run, readout_ct=None)
        post_bin = decode(plain, binary, method="bp")
        t2 = time.perf_counter()
        print(f"{n:>9} specimens, {run.n_pools} pools: BP with Ct {t1 - t0:.2f} s, binary "
              f"{t2 - t1:.2f} s, ratio {(t1 - t0) / (t2 - t1):.1f} (shared machine); positives "
              f"called {int((post_ct.probability > 0.99).sum())} with Ct, "
              f"{int((post_bin.probability > 0.99).sum())} binary")


if __name__ == "__main__":
    main()
