"""Brier scores of decoding 8 x 12 arrays with and without Ct readouts.

Each run: 96 specimens in an 8 x 12 array (rows and columns as pools, one readout each), two or
three positives placed at random, readouts drawn from the Ct model of the assay (individual Cts
from the mixture, pooled Ct with dilution, noise, censoring at the cutoff; false amplifications
at rate 1 - Sp). Decoded twice with the same prior: by the binary decoder on the positive/negative
results under the implied sensitivity Se(k, d) (a table assay holding the Ct model's values), and
by the Ct sampler (statuses and shared individual Cts jointly). Prints the Brier score (mean squared
error of the probabilities against the truth) of both, over all specimens and over the specimens at
crossings of amplified rows and columns (where the binary readouts cannot tell true from false).

    python scripts/ct_array_brier.py [--runs 40] [--seed 1]
"""
from __future__ import annotations

import argparse
import dataclasses
import time

import numpy as np
import pandas as pd

from bayespool.assay import Assay, TableSensitivity, sensitivity_table
from bayespool.ct_evidence import PoolCtStats
from bayespool.decoders import decode
from bayespool.decoders.ct_gibbs import sample_ct
from bayespool.run import Run

ASSAY = {"specificity": 0.995, "ct": {
    "cutoff": 40.0, "cycles_per_doubling": 1.0, "noise_sd": 0.5, "detection_max": 0.99,
    "false_positive_low": 30.0, "positive": [{"weight": 1.0, "mean": 27.0, "sd": 4.0}]}}
ROWS, COLS = 8, 12


def array_run(truth_ct, rng, assay, prevalence):
    """An 8 x 12 array run with Ct readouts drawn from the model; truth_ct: NaN for negatives."""
    m = assay.ct
    layout, readouts = [], []
    grid = np.arange(ROWS * COLS).reshape(ROWS, COLS)
    pools = [(f"R{r}", grid[r]) for r in range(ROWS)] + [(f"C{c}", grid[:, c])
                                                         for c in range(COLS)]
    for name, members in pools:
        layout += [(name, f"S{i:02d}") for i in members]
        cts = truth_ct[members]
        pos = cts[np.isfinite(cts)]
        if len(pos):
            pool_ct = m.pool_shift(len(members)) - m.cycles_per_doubling * np.log2(
                np.exp2(-pos / m.cycles_per_doubling).sum())
            y = m.draw_readout_ct(np.array([pool_ct]), rng)[0]
        else:
            fp = rng.random() < 1 - assay.specificity
            y = rng.uniform(m.false_positive_low, m.cutoff) if fp else np.nan
        readouts.append((name, "positive" if np.isfinite(y) else "negative",
                         f"{y:.2f}" if np.isfinite(y) else ""))
    lay = pd.DataFrame(layout, columns=["pool", "sample"])
    rd = pd.DataFrame(readouts, columns=["pool", "result", "ct"])
    return Run.from_frames(lay, rd, prevalence=prevalence), rd


def study(runs: int, seed: int, sweeps: int) -> dict:
    """Squared errors of both decoders over ``runs`` simulated arrays (see the module docstring)."""
    rng = np.random.default_rng(seed)
    assay = Assay.from_dict(ASSAY)
    tab = sensitivity_table(assay, [ROWS, COLS])
    binary = Assay(assay.specificity, TableSensitivity(tuple(
        (int(r.pool_size), int(r.positives), float(r.value)) for r in tab.itertuples())))
    prevalence = 2.5 / (ROWS * COLS)
    out = {"all_binary": [], "all_ct": [], "cross_binary": [], "cross_ct": [], "seconds": 0.0,
           "assay": assay.describe()}
    for _ in range(runs):
        n_pos = int(rng.integers(2, 4))
        truth_ct = np.full(ROWS * COLS, np.nan)
        idx = rng.choice(ROWS * COLS, n_pos, replace=False)
        truth_ct[idx] = assay.ct.draw_individual_ct(n_pos, rng)
        truth = np.isfinite(truth_ct).astype(float)
        run, rd = array_run(truth_ct, rng, assay, prevalence)
        order = np.argsort(run.sample_ids.astype(str))  # S00..S95 in array order
        plain = dataclasses.replace(run, readout_ct=None)
        p_bin = decode(plain, binary, method="gibbs", seed=1).probability[order]
        t0 = time.perf_counter()
        lp, ll = run.log_likelihood(assay)
        p, *_ = sample_ct(run, assay, PoolCtStats.from_run(run, assay.ct), lp, ll,
                          np.arange(run.n_samples), chains=4, sweeps=sweeps, burn=sweeps // 5,
                          seed=int(rng.integers(1 << 30)))
        out["seconds"] += time.perf_counter() - t0
        p_ct = np.asarray(p)[order]
        amp = rd.set_index("pool")["result"].eq("positive")
        rows = np.array([amp[f"R{r}"] for r in range(ROWS)])
        cols = np.array([amp[f"C{c}"] for c in range(COLS)])
        crossing = (rows[:, None] & cols[None, :]).ravel()
        out["all_binary"].append((p_bin - truth) ** 2)
        out["all_ct"].append((p_ct - truth) ** 2)
        out["cross_binary"].append(((p_bin - truth) ** 2)[crossing])
        out["cross_ct"].append(((p_ct - truth) ** 2)[crossing])
    return out


def brier(parts) -> tuple[float, float]:
    """Mean squared error and its standard error."""
    v = np.concatenate(parts)
    return float(v.mean()), float(v.std(ddof=1) / np.sqrt(len(v)))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=40)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--sweeps", type=int, default=3000)
    args = ap.parse_args()
    res = study(args.runs, args.seed, args.sweeps)
    print(f"{args.runs} simulated 8 x 12 arrays with 2 or 3 positives (assay: {res['assay']})")
    for name, key in (("all specimens", "all"), ("at amplified crossings", "cross")):
        (mb, sb), (mc, sc) = brier(res[f"{key}_binary"]), brier(res[f"{key}_ct"])
        print(f"  Brier score, {name:<24} binary {mb:.4f} ± {sb:.4f}   with Ct {mc:.4f} ± {sc:.4f}"
              f"   ratio {mc / mb:.2f}")
    print(f"  Ct sampler: {res['seconds'] / args.runs:.2f} s per array ({args.sweeps} sweeps x 4 "
          "chains; measured on a shared machine)")

if __name__ == "__main__":
    main()
