"""Recovery and interval coverage of group testing regression on simulated data.

Simulated truth (invented): logit risk = b0 + b1 * age10 + b2 * exposed. Dorfman runs (pools of
k, members of positive pools retested alone) and square arrays (rows and columns pooled) are
read by an imperfect assay; each set is fitted with the same assay. Prints mean estimates,
coverage of the 95% Wald intervals per coefficient (with its Monte Carlo standard error), and
the Brier score of decoding with the fitted risks as priors against one prevalence for all.

    python scripts/regression_coverage.py [--sets 200] [--seed 1]
"""
from __future__ import annotations

import argparse
import dataclasses
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.decoders import decode  # noqa: E402
from bayespool.surveillance.regression import fit_regression  # noqa: E402
from tests.test_surveillance_regression import array_run, dorfman_run  # noqa: E402


def study(name, make, beta, formula, sets, assay):
    t0 = time.perf_counter()
    est, cover, brier = [], np.zeros(len(beta)), []
    for _ in range(sets):
        run, x = make()
        fit = fit_regression(run, assay, formula=formula)
        c = fit.coefficients()
        est.append(fit.estimate)
        cover += (c["lower"].to_numpy() <= beta) & (beta <= c["upper"].to_numpy())
        if x is not None:
            flat = decode(dataclasses.replace(run, prior=np.full(run.n_samples, x.mean())), assay)
            informed = decode(dataclasses.replace(run, prior=fit.risk), assay)
            brier.append((np.mean((flat.probability - x) ** 2),
                          np.mean((informed.probability - x) ** 2)))
    se = np.sqrt(0.95 * 0.05 / sets)
    print(f"{name}: truth {beta.tolist()}, mean estimate {np.round(np.mean(est, axis=0), 3).tolist()}"
          f", 95% coverage {np.round(cover / sets, 3).tolist()} (MC s.e. {se:.3f})"
          + (f", Brier one prevalence {np.mean([b[0] for b in brier]):.5f} vs fitted priors "
             f"{np.mean([b[1] for b in brier]):.5f}" if brier else "")
          + f"; {time.perf_counter() - t0:.0f} s")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sets", type=int, default=200)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    assay = Assay(0.99, ConstantSensitivity(0.95))
    print(f"assay: {assay.describe()}; {args.sets} simulated sets per design")
    beta = np.array([-3.0, 0.5, 1.2])
    study("Dorfman, 1500 specimens, pools of 5", lambda: dorfman_run(rng, 1500, 5, beta, assay)[:2],
          beta, "age10 + exposed", args.sets, assay)
    beta2 = np.array([-2.0, 0.8])
    study("arrays 4 x 4, 40 arrays (640 specimens)",
          lambda: (array_run(rng, 40, 4, beta2, assay), None), beta2, "age10",
          max(20, args.sets // 4), assay)


if __name__ == "__main__":
    main()
