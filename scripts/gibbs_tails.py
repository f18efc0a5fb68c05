"""The sampler's |error / MCSE| against exact enumeration, per probability band, over many seeds.

Designs: Dorfman groups of 16 with individual retests (dilution assay) and small random loopy groups
(constant assay), the generators of tests/test_gibbs_tails.py; exact answers from the exact decoder.
Prints, per band, the number of specimens, the median |z| and the share of |z| > 3 (a standard
normal gives 0.674 and 0.0027), then the mean error over seeds of the worst specimen for several
minimum run lengths (does a longer run remove the tail error?).

    python3 scripts/gibbs_tails.py --seeds 5
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity  # noqa: E402
from bayespool.decoders import decode  # noqa: E402
from bayespool.run import Run  # noqa: E402
from tests.test_gibbs_tails import BANDS, by_sample, dorfman_groups, random_groups  # noqa: E402


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--lengths", default="1000,4000")
    args = ap.parse_args(argv)
    rng = np.random.default_rng(0)
    dil = Assay(0.995, DilutionSensitivity(0.99, 30.0, 1.5))
    const = Assay(0.99, ConstantSensitivity(0.95))
    cases = [(Run.from_frames(*dorfman_groups(rng, 60, 16, 0.03, dil), prevalence=0.05), dil),
             (Run.from_frames(*random_groups(rng, 30, 12, 6, 4, 0.1, const), prevalence=0.05),
              const)]
    exact = [by_sample(decode(r, a, method="exact").to_frame())["probability"].to_numpy()
             for r, a in cases]
    for length in [int(v) for v in args.lengths.split(",")]:
        errs, zs = [], []
        for seed in range(args.seeds):
            e, z = [], []
            for (run, assay), ex in zip(cases, exact):
                post = by_sample(decode(run, assay, method="gibbs", seed=seed,
                                        gibbs_options={"min_sweeps": length}).to_frame())
                e.append(post["probability"].to_numpy() - ex)
                z.append(e[-1] / post["mcse"].to_numpy())
            errs.append(np.concatenate(e))
            zs.append(np.abs(np.concatenate(z)))
        ex = np.concatenate(exact)
        zs, errs = np.array(zs), np.array(errs)
        print(f"minimum length {length} sweeps, {args.seeds} seeds:")
        for name, lo, hi in BANDS:
            band = (ex >= lo) & (ex < hi)
            if band.any():
                zb = zs[:, band]
                print(f"  {name:<12} {band.sum():5d} specimens  median |z| {np.median(zb):.3f}"
                      f"  share |z| > 3 {np.mean(zb > 3):.4f}")
        mean = errs.mean(axis=0)
        sd = errs.std(axis=0, ddof=1) / np.sqrt(args.seeds)
        worst = int(np.argmax(np.abs(mean) / np.where(sd > 0, sd, np.inf)))
        print(f"  worst mean error over seeds: exact {ex[worst]:.6f}, mean error "
              f"{mean[worst]:.2e} ({mean[worst] / sd[worst]:.1f} standard errors of the mean)")


if __name__ == "__main__":
    main()
