"""`bayespool design`: layouts the decoder reads, printed properties, --optimize, clean errors."""
from __future__ import annotations

import json

import pandas as pd

from bayespool.run import Run


def test_design_writes_a_layout_the_decoder_reads(cli, tmp_path):
    out = tmp_path / "layout.csv"
    r = cli("design", "--scheme", "kautz-singleton", "--samples", 120, "--positives", 2,
            "--out", out)
    assert r.code == 0, r.err
    assert "2-disjunct" in r.out and "pools per specimen" in r.out and f"wrote {out}" in r.out
    lay = pd.read_csv(out, dtype=str)
    assert list(lay.columns) == ["pool", "sample"]
    assert lay["sample"].nunique() == 120
    empty = tmp_path / "readouts.csv"
    empty.write_text("pool,result\n", encoding="utf-8")
    run = Run.read(out, empty, None, prevalence=0.01)
    assert run.n_samples == 120 and run.n_pools == lay["pool"].nunique()


def test_design_each_scheme_json(cli, tmp_path):
    cases = [("dorfman", ["--pool-size", 6]), ("array", ["--rows", 8, "--cols", 12]),
             ("kautz-singleton", ["--q", 5, "--dimension", 2]),
             ("random", ["--pools-per-sample", 3, "--pools", 40, "--seed", 2])]
    for scheme, extra in cases:
        out = tmp_path / f"{scheme}.csv"
        r = cli("design", "--scheme", scheme, "--samples", 25, "--out", out, "--json", *extra)
        assert r.code == 0, r.err
        info = json.loads(r.out)
        assert info["scheme"] == scheme and info["samples"] == 25
        assert info["memberships"] == len(pd.read_csv(out))
        assert {"pool_size", "pools_per_sample", "disjunct", "pools"} <= set(info)
    assert json.loads(cli("design", "--scheme", "kautz-singleton", "--samples", 25, "--out",
                          tmp_path / "k.csv", "--q", 5, "--dimension", 2, "--json").out
                      )["disjunct"] == 4  # Kautz & Singleton 1964: (L - 1)/(m - 1) = 4


def test_design_from_samples_file(cli, tmp_path):
    f = tmp_path / "samples.csv"
    f.write_text("sample,plate,well\nX1,p1,A1\nX2,p1,B1\nX3,p1,C1\n", encoding="utf-8")
    out = tmp_path / "lay.csv"
    r = cli("design", "--scheme", "dorfman", "--samples", f, "--pool-size", 2, "--out", out)
    assert r.code == 0, r.err
    assert pd.read_csv(out)["sample"].tolist() == ["X1", "X2", "X3"]


def test_optimize_prints_dorfman_1943_optimum(cli):
    # Dorfman (1943): p = 0.05 -> k = 5, 0.426 tests per person (from memory, references.md)
    r = cli("design", "--scheme", "dorfman", "--prevalence", 0.05, "--optimize")
    assert r.code == 0, r.err
    assert "best pool size: 5" in r.out and "0.4262" in r.out
    assert "pooled sensitivity: 1.0000" in r.out


def test_optimize_with_assay_json_and_layout(cli, tmp_path):
    assay = tmp_path / "assay.toml"
    assay.write_text('specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n',
                     encoding="utf-8")
    out = tmp_path / "lay.csv"
    r = cli("design", "--scheme", "dorfman", "--prevalence", 0.02, "--optimize", "--assay", assay,
            "--samples", 100, "--out", out, "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    k = info["optimum"]["pool_size"]
    # Kim et al. (2007): tests per person 1/k + Se - (Se + Sp - 1) q^k, pooled Se = Se^2
    assert abs(info["optimum"]["tests_per_sample"]
               - (1 / k + 0.95 - (0.95 + 0.99 - 1) * 0.98 ** k)) < 1e-12
    assert abs(info["optimum"]["sensitivity"] - 0.95 ** 2) < 1e-12
    assert info["parameters"]["pool_size"] == k and out.exists()


def test_optimize_says_when_pooling_saves_nothing(cli):
    r = cli("design", "--scheme", "dorfman", "--prevalence", 0.4, "--optimize")
    assert r.code == 0 and "saves nothing" in r.out and "best pool size: 1" in r.out


def test_design_errors_are_one_line_and_leave_outputs_alone(cli, tmp_path):
    out = tmp_path / "layout.csv"
    out.write_text("keep me\n", encoding="utf-8")
    bad = [
        ["--scheme", "dorfman", "--samples", 10, "--out", out],                       # no k
        ["--scheme", "dorfman", "--samples", 10, "--pool-size", 8, "--max-pool-size", 4,
         "--out", out],
        ["--scheme", "kautz-singleton", "--samples", 10, "--q", 4, "--dimension", 2, "--out", out],
        ["--scheme", "random", "--samples", 10, "--out", out],
        ["--scheme", "array", "--samples", 0, "--out", out],
        ["--scheme", "array", "--optimize", "--prevalence", 0.1],
        ["--scheme", "dorfman", "--optimize"],
        ["--scheme", "dorfman", "--samples", tmp_path / "missing.csv", "--pool-size", 2,
         "--out", out],
        ["--scheme", "dorfman", "--samples", 10, "--pool-size", 2,
         "--out", tmp_path / "no" / "x.csv"],
        ["--scheme", "hexagonal", "--samples", 10, "--out", out],
    ]
    for args in bad:
        r = cli("design", *args)
        assert r.code == 2, args
        assert len(r.err.strip().splitlines()) == 1 and "Traceback" not in r.err, r.err
    assert out.read_text(encoding="utf-8") == "keep me\n"


def test_random_design_prints_the_largest_overlap(cli, tmp_path):
    out = tmp_path / "layout.csv"
    r = cli("design", "--scheme", "random", "--samples", 60, "--pools", 12, "--pools-per-sample",
            2, "--seed", 3, "--out", out)
    assert r.code == 0, r.err
    assert "two specimens share at most 1 pool" in r.out
    other = tmp_path / "other.csv"
    r = cli("design", "--scheme", "random", "--samples", 67, "--pools", 12, "--out", other)
    assert r.code == 2 and "never be told apart" in r.err and not other.exists()
