"""Dorfman against Dorfman followed by a code round (``pool-then-code``), side by side.

For each prevalence and pool size both protocols play the same simulated cohorts (the same seed
gives both the same statuses) with readouts drawn from one assay, and the table gives tests per
specimen, sensitivity, specificity and rounds, each with its Monte Carlo standard error. Dorfman
also shows its closed form (Kim et al. 2007, Biometrics 63(4), from memory) as a check on the
simulation. The default assay (constant Se 0.95, Sp 0.995) is an illustration, not a measured assay.

    python3 scripts/code_followup.py --runs 200 [--assay assay.toml] [--markdown]
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity  # noqa: E402
from bayespool.design import code_design  # noqa: E402
from bayespool.simulation import simulate  # noqa: E402

COLUMNS = ("tests_per_sample", "sensitivity", "specificity", "rounds")


def _cell(t, name, digits):
    est, se = t.loc[name, "estimate"], t.loc[name, "mcse"]
    return f"{est:.{digits}f} ± {se:.{digits}f}"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--prevalences", default="0.001,0.005,0.01")
    ap.add_argument("--pool-sizes", default="16,32,64")
    ap.add_argument("--samples", type=int, default=1920)
    ap.add_argument("--runs", type=int, default=200)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--assay", default=None, help="assay TOML (default: constant Se 0.95, "
                    "Sp 0.995, an illustration)")
    ap.add_argument("--markdown", action="store_true", help="print a Markdown table")
    args = ap.parse_args(argv)
    assay = Assay.read(args.assay) if args.assay else Assay(0.995, ConstantSensitivity(0.95))
    prevs = [float(v) for v in args.prevalences.split(",")]
    sizes = [int(v) for v in args.pool_sizes.split(",")]
    print(f"{args.samples} specimens per cohort, {args.runs} cohorts per cell, "
          f"{assay.describe()}; estimate ± Monte Carlo standard error", file=sys.stderr)
    head = ["prevalence", "k", "code pools", "scheme", "tests/specimen", "sensitivity",
            "specificity", "rounds", "seconds"]
    rows = []
    for p in prevs:
        for k in sizes:
            for scheme in ("dorfman", "pool-then-code"):
                start = time.perf_counter()
                sim = simulate(scheme, args.samples, prevalence=p, assay=assay, runs=args.runs,
                               seed=args.seed, pool_size=k)
                secs = time.perf_counter() - start
                t = sim.characteristics.table().set_index("characteristic")
                rows.append([f"{p:g}", str(k), str(code_design(k).n_pools), scheme,
                             _cell(t, "tests_per_sample", 4), _cell(t, "sensitivity", 3),
                             _cell(t, "specificity", 5), _cell(t, "rounds", 2), f"{secs:.1f}"])
                print("  ".join(rows[-1]), file=sys.stderr, flush=True)
    if args.markdown:
        print("| " + " | ".join(head) + " |")
        print("|" + "---|" * len(head))
        for r in rows:
            print("| " + " | ".join(r) + " |")
    else:
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
        print("  ".join(h.rjust(w) for h, w in zip(head, widths)))
        for r in rows:
            print("  ".join(c.rjust(w) for c, w in zip(r, widths)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
