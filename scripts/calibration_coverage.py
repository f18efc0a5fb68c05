"""Coverage of the calibration intervals, profile likelihood against Wald, over many simulated sets.

    python scripts/calibration_coverage.py [--sets 1000] [--seed 1] [--runs 40]

For each design, validation sets are simulated from a known assay and fitted with both interval
methods; the script prints, per parameter, the fraction of 95% intervals that hold the true value
(with its binomial standard error) and the time per fit. With --runs it also simulates past Dorfman
runs with individual follow-up (truth latent) and reports how often the joint fit's profile
intervals hold the true prevalence, specificity and sensitivity. The numbers are measured, not
assumed; the test suite checks a smaller version of the same (tests/test_calibrate_coverage.py).
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity  # noqa: E402
from bayespool.calibration import calibrate_runs, calibrate_validation  # noqa: E402
from bayespool.calibration.validation import ValidationData  # noqa: E402

DESIGNS = {
    "dilution, 30 readouts x 6 dilutions": (
        {"specificity": 0.98, "se_max": 0.95, "r50": 20.0, "slope": 1.5},
        np.concatenate([np.repeat([1, 4, 8, 16, 32, 64], 30), np.full(200, 8)]),
        np.concatenate([np.ones(180, int), np.zeros(200, int)]), "dilution"),
    "dilution, 12 readouts x 5 dilutions (small)": (
        {"specificity": 0.99, "se_max": 0.9, "r50": 15.0, "slope": 2.0},
        np.concatenate([np.repeat([1, 4, 8, 16, 32], 12), np.full(100, 8)]),
        np.concatenate([np.ones(60, int), np.zeros(100, int)]), "dilution"),
    "constant, 60 readouts": (
        {"specificity": 0.995, "sensitivity": 0.9},
        np.concatenate([np.repeat([4, 8, 16], 20), np.full(400, 8)]),
        np.concatenate([np.ones(60, int), np.zeros(400, int)]), "constant"),
}


def assay_of(truth):
    if "se_max" in truth:
        return Assay(truth["specificity"], DilutionSensitivity(truth["se_max"], truth["r50"],
                                                               truth["slope"]))
    return Assay(truth["specificity"], ConstantSensitivity(truth["sensitivity"]))


def validation_coverage(n_sets, seed):
    for name, (truth, k, d, model) in DESIGNS.items():
        print(f"\n{name} ({n_sets} sets)")
        for method in ("profile", "wald"):
            rng = np.random.default_rng(seed)
            hits = dict.fromkeys(truth, 0)
            t0 = time.perf_counter()
            for _ in range(n_sets):
                y = assay_of(truth).draw_readouts(k, d, rng)
                res = calibrate_validation(ValidationData.from_arrays(k, d, y), model,
                                           intervals=method, compare=False)
                for p, v in truth.items():
                    lo, hi = res.interval(p)
                    hits[p] += lo <= v <= hi
            ms = 1000 * (time.perf_counter() - t0) / n_sets
            cells = ", ".join(f"{p} {h / n_sets:.3f} (+-{np.sqrt(0.95 * 0.05 / n_sets):.3f})"
                              for p, h in hits.items())
            print(f"  {method:<8} {ms:6.1f} ms/fit  {cells}")


def latent_coverage(n_runs, seed):
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
    from test_calibrate_latent import dorfman_runs, run_of
    truth = {"prevalence": 0.06, "specificity": 0.98, "sensitivity": 0.92}
    assay = Assay(truth["specificity"], ConstantSensitivity(truth["sensitivity"]))
    hits = dict.fromkeys(truth, 0)
    t0 = time.perf_counter()
    for r in range(n_runs):
        rng = np.random.default_rng(seed + r)
        layout, readouts, _ = dorfman_runs(rng, 800, [5], truth["prevalence"], assay)
        res = calibrate_runs(run_of(layout, readouts), "constant")
        for p, v in truth.items():
            lo, hi = res.interval(p)
            hits[p] += lo <= v <= hi
    s = (time.perf_counter() - t0) / n_runs
    print(f"\npast Dorfman runs (800 specimens, pools of 5, follow-up), {n_runs} runs, "
          f"{s:.2f} s/fit")
    print("  profile  " + ", ".join(f"{p} {h / n_runs:.3f}" for p, h in hits.items()))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sets", type=int, default=1000)
    parser.add_argument("--runs", type=int, default=0)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    validation_coverage(args.sets, args.seed)
    if args.runs:
        latent_coverage(args.runs, args.seed)


if __name__ == "__main__":
    main()
