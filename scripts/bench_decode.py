"""Benchmark: `bayespool decode --method bp` against the I/O floor, side by side in one run.

The workload is a non-adaptive screen: every specimen is in ``w`` pools of size ``k`` (``w`` rounds,
each a random partition of the specimens into pools), read once each through a constant assay
(Se 0.95, Sp 0.99) at 1% prevalence. The default sizes end with the target workload: 1,000,000
specimens in 187,500 pools of 16, 3,000,000 memberships.

For each size it measures, in the same run:
  * the I/O floor: pandas reading the layout and readouts CSVs and writing a posterior-shaped CSV
    (the same rows and columns the command writes), in this process with pandas already imported;
  * the whole command `python -m bayespool decode --method bp ... --json` as a child process
    (interpreter start, imports, parsing, checks, decoding, writing), its wall time and peak
    resident memory (from the child's own rusage);
and prints the ratio command / floor (wall clock, and CPU time, which a busy machine disturbs
less), the BP sweep time per million memberships (from the command's
JSON diagnostics) and the peak memory. It also times a warm start of `bayespool --help` and of a
small decode. The data is synthetic, made here for timing only.

    python3 scripts/bench_decode.py                 # 10k, 100k, 1M specimens
    python3 scripts/bench_decode.py --samples 1000000 --keep DIR
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
SENSITIVITY, SPECIFICITY, PREVALENCE = 0.95, 0.99, 0.01


def make_workload(folder: Path, n_samples: int, pool_size: int = 16, pools_per_sample: int = 3,
                  prevalence: float = PREVALENCE, seed: int = 1) -> dict:
    """Write layout.csv, readouts.csv and assay.toml of a synthetic screen into ``folder``."""
    rng = np.random.default_rng(seed)
    per_round = n_samples // pool_size
    n = per_round * pool_size
    truth = rng.random(n) < prevalence
    width = len(str(n))
    sample_ids = np.char.add("S", np.char.zfill(np.arange(n).astype(str), width))
    pool_of = []
    sample_of = []
    for r in range(pools_per_sample):
        perm = rng.permutation(n)
        pool_of.append(r * per_round + np.arange(n) // pool_size)
        sample_of.append(perm)
    pool_of = np.concatenate(pool_of)
    sample_of = np.concatenate(sample_of)
    n_pools = per_round * pools_per_sample
    pool_ids = np.char.add("P", np.char.zfill(np.arange(n_pools).astype(str), len(str(n_pools))))
    positives = np.bincount(pool_of, weights=truth[sample_of], minlength=n_pools)
    p_pos = np.where(positives > 0, SENSITIVITY, 1.0 - SPECIFICITY)
    result = np.where(rng.random(n_pools) < p_pos, "positive", "negative")
    folder.mkdir(parents=True, exist_ok=True)
    files = {"layout": folder / "layout.csv", "readouts": folder / "readouts.csv",
             "assay": folder / "assay.toml", "out": folder / "posterior.csv"}
    with open(files["layout"], "w", encoding="utf-8") as fh:
        fh.write("pool,sample\n")
        fh.write("\n".join(np.char.add(np.char.add(pool_ids[pool_of], ","),
                                       sample_ids[sample_of])) + "\n")
    with open(files["readouts"], "w", encoding="utf-8") as fh:
        fh.write("pool,result\n")
        fh.write("\n".join(np.char.add(np.char.add(pool_ids, ","), result)) + "\n")
    files["assay"].write_text(f'specificity = {SPECIFICITY}\n[sensitivity]\nmodel = "constant"\n'
                              f"value = {SENSITIVITY}\n", encoding="utf-8")
    return {"files": files, "samples": n, "pools": n_pools, "memberships": len(pool_of),
            "truth": truth, "sample_ids": sample_ids}


def io_floor(files: dict, out: Path, sample_ids: np.ndarray) -> tuple[float, float]:
    """Wall and CPU seconds pandas needs to read both CSVs and write a posterior-shaped CSV of the samples.

    The frame written has the command's columns and rows; it is built before the clock starts, so
    the floor is reading and writing alone (no parsing of IDs, no arithmetic).
    """
    n = len(sample_ids)
    p = np.linspace(1e-6, 0.999, n)
    counts = np.full(n, 3)
    frame = pd.DataFrame({"sample": sample_ids.astype(object), "probability": p,
                          "call": np.where(p > 0.99, "positive", "negative").astype(object),
                          "prior": np.full(n, PREVALENCE), "method": np.full(n, "bp", object),
                          "pools": counts, "positive_pools": counts})
    t0, c0 = time.perf_counter(), time.process_time()
    pd.read_csv(files["layout"])
    pd.read_csv(files["readouts"])
    frame.to_csv(out, index=False)
    return time.perf_counter() - t0, time.process_time() - c0


def run_child(args: list[str]) -> tuple[float, float, str, str, float]:
    """Wall seconds, peak RSS in MB, stdout, stderr and CPU seconds of one child process."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        t0 = time.perf_counter()
        proc = subprocess.Popen(args, cwd=ROOT, stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        text, errors = out.read().decode(), err.read().decode()
    if proc.returncode != 0:
        raise RuntimeError(f"{' '.join(args)} failed ({proc.returncode}): {errors}")
    return wall, usage.ru_maxrss / 1024.0, text, errors, usage.ru_utime + usage.ru_stime


def decode_command(files: dict, extra=()) -> list[str]:
    return [sys.executable, "-m", "bayespool", "decode", "--layout", str(files["layout"]),
            "--readouts", str(files["readouts"]), "--assay", str(files["assay"]),
            "--prevalence", str(PREVALENCE), "--method", "bp", "--out", str(files["out"]),
            "--json", *extra]


def bench(n_samples: int, folder: Path) -> dict:
    work = make_workload(folder, n_samples)
    files = work["files"]
    floor, floor_cpu = io_floor(files, folder / "floor.csv", work["sample_ids"])
    wall, rss, text, _, cpu = run_child(decode_command(files))
    summary = json.loads(text)
    bp = summary["bp"]
    posterior = pd.read_csv(files["out"], dtype={"sample": str})
    truth = pd.Series(work["truth"], index=work["sample_ids"]).reindex(posterior["sample"])
    calls = posterior["call"].to_numpy()
    decided = calls != "inconclusive"
    wrong = int(((calls == "positive") != truth.to_numpy())[decided].sum())
    per_million = bp["seconds"] / max(bp["sweeps"], 1) / (work["memberships"] / 1e6)
    per_million_cpu = bp["cpu_seconds"] / max(bp["sweeps"], 1) / (work["memberships"] / 1e6)
    return {"samples": work["samples"], "pools": work["pools"],
            "memberships": work["memberships"], "floor_s": floor, "command_s": wall,
            "command_cpu_s": cpu, "floor_cpu_s": floor_cpu, "cpu_ratio": cpu / floor_cpu,
            "ratio": wall / floor, "peak_mb": rss, "sweeps": bp["sweeps"],
            "converged": bp["converged"], "residual": bp["residual"],
            "bp_s": bp["seconds"], "sweep_s_per_million": per_million,
            "sweep_cpu_s_per_million": per_million_cpu,
            "decided": int(decided.sum()), "wrong_calls": wrong}


def warm_start(folder: Path) -> dict:
    """Best of three warm starts (after one that fills the numba cache) of `bayespool --help` and
    of a small decode, as (wall seconds, CPU seconds)."""
    small = make_workload(folder, 1600)["files"]
    out = {}
    for name, args in (("help", [sys.executable, "-m", "bayespool", "--help"]),
                       ("small_decode", decode_command(small))):
        run_child(args)
        runs = [run_child(args) for _ in range(3)]
        out[name] = (min(r[0] for r in runs), min(r[4] for r in runs))
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--samples", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    parser.add_argument("--keep", metavar="DIR", help="keep the generated files in DIR")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(args.keep) if args.keep else Path(tmp)
        warm = warm_start(base / "warm")
        print(f"warm start (wall / CPU seconds): bayespool --help {warm['help'][0]:.2f} / "
              f"{warm['help'][1]:.2f}, small decode (1,600 specimens) "
              f"{warm['small_decode'][0]:.2f} / {warm['small_decode'][1]:.2f}")
        print(f"{'specimens':>10} {'pools':>8} {'members':>9} {'floor s':>8} {'command s':>9} "
              f"{'ratio':>6} {'floor cpu':>9} {'cpu s':>6} {'cpu ratio':>9} {'sweeps':>6} "
              f"{'conv':>5} {'s/sweep/1M':>10} {'cpu':>6} "
              f"{'peak MB':>8} {'wrong':>6}")
        for n in args.samples:
            r = bench(n, base / f"n{n}")
            print(f"{r['samples']:>10,} {r['pools']:>8,} {r['memberships']:>9,} "
                  f"{r['floor_s']:>8.2f} {r['command_s']:>9.2f} {r['ratio']:>6.2f} "
                  f"{r['floor_cpu_s']:>9.2f} {r['command_cpu_s']:>6.2f} {r['cpu_ratio']:>9.2f} "
                  f"{r['sweeps']:>6} {str(r['converged']):>5} {r['sweep_s_per_million']:>10.4f} "
                  f"{r['sweep_cpu_s_per_million']:>6.4f} "
                  f"{r['peak_mb']:>8.0f} {r['wrong_calls']:>6}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
