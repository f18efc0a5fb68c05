"""Posterior calibration of decoding with Ct readouts: on runs simulated from the Ct load model,
are the decoded probabilities reliable (among specimens given probability p, a fraction p positive)?

Runs (invented settings): 96 specimens in pools of 4 at a prevalence of 8 %, each pool read once
with its Ct; the first two members of an amplified pool are read alone, the other two are left to
inference, so probabilities between 0 and 1 are common. Simulated from the model's definition
(bayespool.ct; the issue's model) directly: statuses from the prior, each positive's individual Ct
from the mixture, a pool's Ct from the positives' summed amounts diluted k-fold, readout noise,
detection and the cutoff, false amplifications uniform below the cutoff. A correct posterior is
calibrated by construction (E[x | p] = p), so each probability bin's sum of (x - p) is zero in
expectation; z divides it by the larger of two standard errors, the binomial one (sum of p (1 - p))
and the spread across runs (runs are independent; specimens of one run share pools).

    python scripts/ct_reliability.py [--runs 250] [--seed 5]
"""
import argparse

import numpy as np
import pandas as pd

from bayespool.assay import Assay
from bayespool.ct import CtModel, CtSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

MODEL = CtModel(cutoff=38.0, cycles_per_doubling=1.0, noise_sd=0.8, false_positive_low=33.0,
                weights=(0.7, 0.3), means=(31.0, 26.0), sds=(3.0, 2.0), detection_max=0.95)
ASSAY = Assay(0.98, CtSensitivity(MODEL))
BINS = (0.0, 0.05, 0.2, 0.4, 0.6, 0.8, 0.95, 1.0000001)


def simulate_run(rng, n=96, k=4, prevalence=0.08, follow=2):
    """Pools of k read once with Ct; an amplified pool's first ``follow`` members read alone."""
    truth = rng.random(n) < prevalence
    ct = np.where(truth, MODEL.draw_individual_ct(n, rng), np.nan)
    s = MODEL.cycles_per_doubling
    lay, rd = [], []

    def read(pool, members):
        pos = members[truth[members]]
        if len(pos):
            c = s * np.log2(len(members)) - s * np.log2(np.exp2(-ct[pos] / s).sum())
            y = float(MODEL.draw_readout_ct(np.array([c]), rng)[0])
        elif rng.random() < 1 - ASSAY.specificity:
            y = float(rng.uniform(MODEL.false_positive_low, MODEL.cutoff))
        else:
            y = np.nan
        rd.append((pool, "positive" if np.isfinite(y) else "negative",
                   f"{y:.2f}" if np.isfinite(y) else ""))
        return np.isfinite(y)

    for b in range(n // k):
        members = np.arange(b * k, (b + 1) * k)
        lay += [(f"P{b}", f"S{i}") for i in members]
        if read(f"P{b}", members):
            for i in members[:follow]:
                lay.append((f"I{i}", f"S{i}"))
                read(f"I{i}", np.array([i]))
    run = Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                          pd.DataFrame(rd, columns=["pool", "result", "ct"]),
                          prevalence=prevalence)
    order = np.array([int(str(s)[1:]) for s in run.sample_ids])
    return run, truth[order]


def reliability(runs=60, seed=0, **kw):
    """Per probability bin: specimens, mean p, observed rate, z of the summed residual."""
    rng = np.random.default_rng(seed)
    per_run = []
    for _ in range(runs):
        run, truth = simulate_run(rng, **kw)
        p = decode(run, ASSAY, expectations=False, model_check=False).probability
        b = np.digitize(p, BINS) - 1
        per_run.append(np.stack([np.bincount(b, minlength=len(BINS) - 1),
                                 np.bincount(b, p, minlength=len(BINS) - 1),
                                 np.bincount(b, p * (1 - p), minlength=len(BINS) - 1),
                                 np.bincount(b, truth.astype(float), minlength=len(BINS) - 1)]))
    a = np.array(per_run)                     # runs x (count, sum p, p(1-p), positives) x bins
    resid = a[:, 3] - a[:, 1]
    se = np.sqrt(np.maximum(np.sum(resid ** 2, axis=0), a[:, 2].sum(axis=0)))
    n = a[:, 0].sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return pd.DataFrame({"low": BINS[:-1], "high": BINS[1:], "specimens": n,
                             "mean_p": a[:, 1].sum(axis=0) / n,
                             "observed": a[:, 3].sum(axis=0) / n,
                             "z": resid.sum(axis=0) / se})


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--runs", type=int, default=250)
    p.add_argument("--seed", type=int, default=5)
    args = p.parse_args(argv)
    table = reliability(runs=args.runs, seed=args.seed)
    with pd.option_context("display.width", 120, "display.precision", 4):
        print(table.to_string(index=False))
    print(f"largest |z| over bins with 20 or more specimens: "
          f"{np.abs(table.loc[table['specimens'] >= 20, 'z']).max():.2f}")


if __name__ == "__main__":
    main()
