"""Closed-loop evaluation of the Bayesian loop against classic Dorfman testing.

Plays the ``bayes`` protocol on simulated cohorts and compares tests per specimen and expected
errors (missed positives plus false positives) with the closed form for Dorfman at its best pool
size (Kim, Hudgens, Dreyfuss, Westreich & Pilcher 2007, Biometrics 63(4), from memory; see
references.md), and tests used with the counting bound n * H(p) (Aldridge, Johnson & Scarlett 2019).

    python3 scripts/eval_loop.py --samples 600 --prevalence 0.02 --runs 100
    python3 scripts/eval_loop.py --table --samples 600 --runs 25 --max-pool-size 16 \
        --target-sensitivity 0.95 --max-false-discovery 0.05     # README's table
"""
from __future__ import annotations

import argparse
import json
import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity  # noqa: E402
from bayespool.simulation.protocol import Tester  # noqa: E402
from bayespool.simulation.protocols.bayes import BayesianLoop  # noqa: E402


def kim_dorfman(p: float, se: float, sp: float, k: int) -> dict:
    """Dorfman with test error (Kim et al. 2007, from memory): per specimen."""
    q = 1.0 - p
    tests = 1.0 / k + se - (se + sp - 1.0) * q ** k if k > 1 else 1.0
    sens = se * se if k > 1 else se
    spec = 1.0 - (1.0 - sp) * (se - (se + sp - 1.0) * q ** (k - 1)) if k > 1 else sp
    errors = p * (1.0 - sens) + q * (1.0 - spec)
    return {"k": k, "tests": tests, "sensitivity": sens, "specificity": spec, "errors": errors}


def best_dorfman(p, se, sp, kmax=64):
    return min((kim_dorfman(p, se, sp, k) for k in range(2, kmax + 1)), key=lambda r: r["tests"])


def dorfman_with_assay(p: float, assay, k: int) -> dict:
    """Dorfman's closed form for any Se(k, d): sum over the binomial count of the other members'
    positives (reduces to Kim et al. 2007 for a constant assay)."""
    from scipy.stats import binom
    j = np.arange(k)
    others = binom.pmf(j, k - 1, p)
    q_pool = assay.positive_probability(np.full(k, k), j)        # pool reading, i negative
    q_pos = assay.positive_probability(np.full(k, k), j + 1)     # pool reading, i positive
    alone = float(assay.positive_probability(np.array([1]), np.array([1]))[0])
    sp1 = assay.specificity
    d = np.arange(k + 1)
    p_pool = float(np.sum(binom.pmf(d, k, p) * assay.positive_probability(np.full(k + 1, k), d)))
    sens = alone * float(np.sum(others * q_pos))
    spec = 1.0 - (1.0 - sp1) * float(np.sum(others * q_pool))
    return {"k": k, "tests": 1.0 / k + p_pool, "sensitivity": sens, "specificity": spec,
            "errors": p * (1 - sens) + (1 - p) * (1 - spec)}


def best_dorfman_assay(p, assay, kmax=64):
    return min((dorfman_with_assay(p, assay, k) for k in range(2, kmax + 1)),
               key=lambda r: r["tests"])


def table(n, runs, seed, prevalences=(0.005, 0.01, 0.02, 0.05), array_runs=2000, kmax=16,
          **targets):
    """Markdown rows: individual and Dorfman (closed forms), the array (simulated, cohorts of 960)
    and the Bayesian loop with the batch targets (simulated)."""
    from bayespool.simulation import simulate
    assays = {"constant": Assay(0.99, ConstantSensitivity(0.95)),
              "dilution": Assay(0.99, DilutionSensitivity(0.95, 40.0, 1.5))}
    rows = ["| assay | prevalence | scheme | tests per specimen | sensitivity | specificity |",
            "| --- | --- | --- | --- | --- | --- |"]
    for name, assay in assays.items():
        for p in prevalences:
            se1 = float(assay.positive_probability(np.array([1]), np.array([1]))[0])
            rows.append(f"| {name} | {p:g} | individual | 1 | {se1:.4f} | "
                        f"{assay.specificity:.4f} |")
            dorf = best_dorfman_assay(p, assay, kmax)
            rows.append(f"| {name} | {p:g} | Dorfman k={dorf['k']} (closed form) | "
                        f"{dorf['tests']:.4f} | {dorf['sensitivity']:.4f} | "
                        f"{dorf['specificity']:.4f} |")
            arr = simulate("array", 960, prevalence=p, assay=assay, runs=array_runs,
                           seed=seed).summary()
            rows.append(f"| {name} | {p:g} | array 8 x 12 (simulated) | "
                        f"{arr['tests_per_sample']:.4f} | {arr['sensitivity']:.4f} | "
                        f"{arr['specificity']:.5f} |")
            loop = evaluate(n, p, assay, runs, seed, **targets)
            rows.append(f"| {name} | {p:g} | Bayesian loop ({runs} cohorts of {n}) | "
                        f"{loop['tests_per_sample']:.4f} | {loop['sensitivity']:.4f} | "
                        f"{loop['specificity']:.5f} |")
            print(rows[-1], file=sys.stderr, flush=True)
    return "\n".join(rows)


def entropy(p):
    return -(p * math.log2(p) + (1 - p) * math.log2(1 - p))


def evaluate(n, prevalence, assay, runs, seed, **options):
    rng = np.random.default_rng(seed)
    proto = BayesianLoop(**options)
    tests = rounds = fn = fp = pos = neg = undecided = 0
    expected_errors = 0.0
    per_run_errors = []
    start = time.perf_counter()
    for r in range(runs):
        truth = rng.random(n) < prevalence
        tester = Tester(truth, assay, np.random.default_rng(rng.integers(2**63)))
        out = proto.run(tester, np.full(n, prevalence))
        tests += out.tests
        rounds += out.rounds
        fn += int(np.sum(truth & ~out.calls))
        fp += int(np.sum(~truth & out.calls))
        pos += int(truth.sum())
        neg += int((~truth).sum())
        undecided += proto.undecided_at_end
        prob = proto.last_posterior.probability
        expected_errors += float(np.sum(np.where(out.calls, 1.0 - prob, prob)))
        per_run_errors.append(int(np.sum(truth != out.calls)))
        if sys.stderr.isatty():
            print(f"\r  run {r + 1}/{runs}", end="", file=sys.stderr)
    if sys.stderr.isatty():
        print(file=sys.stderr)
    total = n * runs
    return {"tests_per_sample": tests / total, "rounds": rounds / runs,
            "errors_per_sample": (fn + fp) / total,
            "errors_per_sample_se": float(np.std(per_run_errors, ddof=1) / math.sqrt(runs) / n)
            if runs > 1 else float("nan"),
            "posterior_expected_errors_per_sample": expected_errors / total,
            "missed": fn / runs, "false_positive": fp / runs,
            "sensitivity": 1 - fn / max(pos, 1), "specificity": 1 - fp / max(neg, 1),
            "undecided_per_run": undecided / runs,
            "bound_ratio": tests / (total * entropy(prevalence)),
            "seconds_per_run": (time.perf_counter() - start) / runs}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=600)
    ap.add_argument("--prevalence", type=float, default=0.02)
    ap.add_argument("--runs", type=int, default=100)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--se", type=float, default=0.95)
    ap.add_argument("--sp", type=float, default=0.99)
    ap.add_argument("--dilution", action="store_true",
                   help="dilution assay se_max=SE, r50=40, slope=1.5 instead of constant")
    ap.add_argument("--tests-per-round", type=int, default=None)
    ap.add_argument("--max-pool-size", type=int, default=None)
    ap.add_argument("--relative", type=float, default=None)
    ap.add_argument("--target-sensitivity", type=float, default=None)
    ap.add_argument("--max-false-discovery", type=float, default=None)
    ap.add_argument("--array-runs", type=int, default=2000)
    ap.add_argument("--json", action="store_true")
    ap.add_argument("--table", action="store_true",
                    help="print the README table (prevalence 0.5%%, 1%%, 2%%, 5%%; constant and "
                    "dilution assay)")
    args = ap.parse_args(argv)
    if args.table:
        print(table(args.samples, args.runs, args.seed, array_runs=args.array_runs,
                    kmax=args.max_pool_size or 16, max_pool_size=args.max_pool_size,
                    target_sensitivity=args.target_sensitivity,
                    max_false_discovery=args.max_false_discovery))
        return 0
    sens = (DilutionSensitivity(args.se, 40.0, 1.5) if args.dilution
            else ConstantSensitivity(args.se))
    assay = Assay(args.sp, sens)
    loop = evaluate(args.samples, args.prevalence, assay, args.runs, args.seed,
                    tests=args.tests_per_round, max_pool_size=args.max_pool_size,
                    relative_information=args.relative,
                    target_sensitivity=args.target_sensitivity,
                    max_false_discovery=args.max_false_discovery)
    dorf = best_dorfman_assay(args.prevalence, assay)
    result = {"samples": args.samples, "prevalence": args.prevalence, "runs": args.runs,
              "assay": assay.describe(), "bayes": loop,
              "dorfman_closed_form": dorf}
    if args.json:
        print(json.dumps(result, indent=2))
        return 0
    print(f"{args.runs} cohorts of {args.samples} at prevalence {args.prevalence:g}, "
          f"{assay.describe()}")
    print(f"  bayes loop : {loop['tests_per_sample']:.4f} tests/specimen, "
          f"{loop['errors_per_sample'] * args.samples:.3f} errors per cohort "
          f"(+- {loop['errors_per_sample_se'] * args.samples:.3f}; {loop['missed']:.3f} missed, "
          f"{loop['false_positive']:.3f} false positive; posterior-expected "
          f"{loop['posterior_expected_errors_per_sample'] * args.samples:.3f}), "
          f"{loop['rounds']:.1f} rounds, sens {loop['sensitivity']:.4f} spec "
          f"{loop['specificity']:.5f}, "
          f"{loop['undecided_per_run']:.2f} undecided at end, "
          f"{loop['seconds_per_run']:.2f} s/cohort")
    print(f"  tests / counting bound n*H(p): {loop['bound_ratio']:.3f}")
    print(f"  Dorfman k={dorf['k']} (closed form, Kim et al. 2007 for a constant assay): "
          f"{dorf['tests']:.4f} tests/specimen, {dorf['errors'] * args.samples:.3f} expected "
          f"errors per cohort")
    print(f"  ratios bayes/Dorfman: tests {loop['tests_per_sample'] / dorf['tests']:.3f}, "
          f"errors {loop['errors_per_sample'] / dorf['errors']:.3f} (posterior-expected "
          f"{loop['posterior_expected_errors_per_sample'] / dorf['errors']:.3f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
