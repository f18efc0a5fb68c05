"""Coverage of prevalence intervals when the assay's specificity is only known from a calibration.

Simulated (invented) surveillance: 100 pools of 10 at prevalence 1%, read with sensitivity 0.95 and
a specificity known from 60 negative controls with one false positive (its Jeffreys posterior is
Beta(1.5, 59.5), mean 0.975). Each simulated set draws the true specificity from that posterior
(the uncertainty the calibration leaves), then readouts; the 95% likelihood-ratio interval is
computed with the assay taken as fitted (Sp = 59/60) and integrated over the posterior
(``assay_uncertainty``). Prints both coverages with their Monte Carlo standard error.

    python scripts/prevalence_assay_uncertainty.py [--sets 400] [--seed 1]
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.surveillance import estimate_prevalence  # noqa: E402

PREVALENCE, POOLS, SIZE, SE = 0.01, 100, 10, 0.95
SPEC_BETA = (1.5, 59.5)          # Jeffreys posterior of Sp after 59 of 60 negative controls


def fitted_assay() -> Assay:
    fp, tn = SPEC_BETA   # Beta(false positives + 1/2, true negatives + 1/2) of 1 - Sp
    return Assay(59 / 60, ConstantSensitivity(SE),
                 details={"uncertainty": {"specificity_beta": [tn, fp]}})


def simulate(rng) -> pd.DataFrame:
    sp = rng.beta(SPEC_BETA[1], SPEC_BETA[0])   # the specificity this batch really has
    d = rng.binomial(SIZE, PREVALENCE, POOLS)
    positive = np.where(d > 0, rng.random(POOLS) < SE, rng.random(POOLS) < 1 - sp)
    return pd.DataFrame({"pool": [f"P{t}" for t in range(POOLS)], "size": SIZE,
                         "result": np.where(positive, "positive", "negative")})


def coverage(sets: int, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    assay = fitted_assay()
    hits = {"as fitted": 0, "integrated": 0}
    for _ in range(sets):
        pools = simulate(rng)
        for name, spread in (("as fitted", False), ("integrated", True)):
            g = estimate_prevalence(pools, assay, interval="likelihood",
                                    assay_uncertainty=spread).groups[0]
            hits[name] += g.lower <= PREVALENCE <= g.upper
    return {k: v / sets for k, v in hits.items()}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sets", type=int, default=400)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    cov = coverage(args.sets, args.seed)
    se = np.sqrt(0.95 * 0.05 / args.sets)
    print(f"{args.sets} sets, 95% likelihood intervals: assay as fitted {cov['as fitted']:.3f}, "
          f"integrated over its uncertainty {cov['integrated']:.3f} (MC s.e. {se:.3f}); "
          f"{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
