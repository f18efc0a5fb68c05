"""Shared test helpers: running the command line in-process and building small runs."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from bayespool.cli import main


class CliResult:
    def __init__(self, code, out, err):
        self.code, self.out, self.err = code, out, err


@pytest.fixture
def cli(capsys):
    """Run ``bayespool ARGS`` in-process; returns exit code, stdout and stderr."""
    def run(*args):
        try:
            code = main([str(a) for a in args])
        except SystemExit as exc:  # argparse usage errors and --help
            code = exc.code
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)
    return run


def write_csv(path, rows, header):
    """Write a small CSV by hand (tests must control every byte)."""
    lines = [",".join(header)] + [",".join(str(v) for v in r) for r in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def random_design(rng, n_samples, n_pools, max_pool=4, min_pool=1):
    """Random pools (members drawn without replacement) as a layout DataFrame."""
    rows = []
    for t in range(n_pools):
        k = int(rng.integers(min_pool, max_pool + 1))
        for s in rng.choice(n_samples, size=min(k, n_samples), replace=False):
            rows.append({"pool": f"P{t}", "sample": f"S{s}"})
    return pd.DataFrame(rows)
