"""Belief propagation against exact enumeration, per kind of design: the figures in README.md.

Each design kind is decoded many times on simulated readouts (groups small enough to enumerate):
Dorfman pools with individual retests (tree-shaped), 4 x 4 arrays, Kautz-Singleton (q = 5,
length 3, dimension 2: 20 specimens in 15 pools of 4), random groups of 16 specimens in two pools of
4 each, and dense groups (16 to 20 specimens, each in 3 to 6 pools of 5 to 10). Prints, per kind,
the mean and maximum |BP - exact|, how often BP reported convergence, and the share of specimens
off by more than 0.1. Assay: constant Se 0.95, Sp 0.99; prevalence 5%.

    python3 scripts/bp_accuracy.py --runs 40
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.decoders import decode  # noqa: E402
from bayespool.design import make_design  # noqa: E402
from bayespool.run import Run  # noqa: E402

ASSAY = Assay(0.99, ConstantSensitivity(0.95))
PREVALENCE = 0.05


def readouts_for(layout: pd.DataFrame, rng) -> pd.DataFrame:
    samples = layout["sample"].unique()
    x = dict(zip(samples, rng.random(len(samples)) < PREVALENCE))
    rows = []
    for pool, members in layout.groupby("pool", sort=False)["sample"]:
        d = sum(x[s] for s in members)
        p = float(ASSAY.positive_probability(np.array([len(members)]), np.array([d]))[0])
        rows.append((pool, "positive" if rng.random() < p else "negative"))
    return pd.DataFrame(rows, columns=["pool", "result"]), x


def dorfman(rng):
    layout = make_design("dorfman", 20, pool_size=10).layout
    rd, x = readouts_for(layout, rng)
    extra_l, extra_r = [], []
    for pool in rd.loc[rd["result"] == "positive", "pool"]:
        for s in layout.loc[layout["pool"] == pool, "sample"]:
            extra_l.append((f"R{s}", s))
            p = 0.95 if x[s] else 0.01
            extra_r.append((f"R{s}", "positive" if rng.random() < p else "negative"))
    return (pd.concat([layout, pd.DataFrame(extra_l, columns=["pool", "sample"])]),
            pd.concat([rd, pd.DataFrame(extra_r, columns=["pool", "result"])]))


def fixed(scheme, n, **options):
    layout = make_design(scheme, n, **options).layout

    def make(rng):
        return layout, readouts_for(layout, rng)[0]
    return make


def random_group(n_lo, n_hi, w_lo, w_hi, k_lo, k_hi):
    def make(rng):
        n = int(rng.integers(n_lo, n_hi + 1))
        rows = []
        t = 0
        for s in range(n):
            for _ in range(int(rng.integers(w_lo, w_hi + 1))):
                rows.append((f"P{t}", f"S{s}"))
                t += 1
        # merge memberships into pools of k_lo..k_hi distinct specimens
        pools, current, members = [], [], set()
        target = int(rng.integers(k_lo, k_hi + 1))
        order = rng.permutation(len(rows))
        for i in order:
            s = rows[i][1]
            if s in members:
                continue
            current.append(s)
            members.add(s)
            if len(current) == target:
                pools.append(current)
                current, members = [], set()
                target = int(rng.integers(k_lo, k_hi + 1))
        if current:
            pools.append(current)
        layout = pd.DataFrame([(f"P{j}", s) for j, pool in enumerate(pools) for s in pool],
                              columns=["pool", "sample"])
        return layout, readouts_for(layout, rng)[0]
    return make


KINDS = {
    "Dorfman with retests (tree)": dorfman,
    "array 4 x 4": fixed("array", 16, rows=4, cols=4),
    "Kautz-Singleton q=5 L=3 m=2": fixed("kautz-singleton", 20, q=5, dimension=2, length=3),
    "random, 16 specimens x 2 pools of 4": random_group(16, 16, 2, 2, 4, 4),
    "dense, 16-20 specimens x 3-6 pools of 5-10": random_group(16, 20, 3, 6, 5, 10),
}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=40)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    print(f"{'design':<44} {'specimens':>9} {'mean err':>9} {'max err':>8} {'>0.1':>6} "
          f"{'converged':>9}")
    for name, make in KINDS.items():
        errs, conv = [], 0
        for _ in range(args.runs):
            layout, rd = make(rng)
            run = Run.from_frames(layout, rd, prevalence=PREVALENCE)
            ex = decode(run, ASSAY, method="exact").probability
            bp = decode(run, ASSAY, method="bp")
            conv += bool(bp.diagnostics.get("converged", True))
            errs.append(np.abs(np.asarray(bp.probability) - np.asarray(ex)))
        e = np.concatenate(errs)
        print(f"{name:<44} {len(e):9d} {e.mean():9.4f} {e.max():8.3f} {np.mean(e > 0.1):6.3f} "
              f"{conv:4d}/{args.runs}")


if __name__ == "__main__":
    main()
