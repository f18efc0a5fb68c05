"""`bayespool simulate`: the interface.md form, JSON, sweeps as tables, clean errors."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd

ROOT = Path(__file__).resolve().parents[1]


def _assay(tmp_path, se=0.9, sp=0.98):
    f = tmp_path / "assay.toml"
    f.write_text(f'specificity = {sp}\n[sensitivity]\nmodel = "constant"\nvalue = {se}\n',
                 encoding="utf-8")
    return f


def test_interface_form_prints_json(tmp_path):
    # exactly the command of interface.md, as a separate process
    assay = _assay(tmp_path)
    proc = subprocess.run([sys.executable, "-m", "bayespool", "simulate", "--scheme", "dorfman",
                           "--pool-size", "5", "--prevalence", "0.05", "--assay", str(assay),
                           "--samples", "1000", "--runs", "400", "--seed", "7", "--json"],
                          cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    info = json.loads(proc.stdout)
    for key in ("tests_per_sample", "sensitivity", "specificity"):
        assert isinstance(info[key], float)
        assert info[f"{key}_se"] > 0
    # Kim et al. (2007) closed forms (from memory, references.md) within 4 Monte Carlo errors
    q, k, se, sp = 0.95, 5, 0.9, 0.98
    kim = {"tests_per_sample": 1 / k + se - (se + sp - 1) * q ** k, "sensitivity": se ** 2,
           "specificity": 1 - (1 - sp) * (se - (se + sp - 1) * q ** (k - 1))}
    for key, value in kim.items():
        assert abs(info[key] - value) < 4 * info[f"{key}_se"], key
        assert abs(info["expected"][key] - value) < 1e-12
    assert {"ppv", "npv", "rounds", "draws_per_sample", "max_draws"} <= set(info)


def test_same_seed_same_result(cli, tmp_path):
    args = ["simulate", "--scheme", "array", "--prevalence", 0.02, "--assay", _assay(tmp_path),
            "--samples", 192, "--runs", 50, "--seed", 3, "--json"]
    a, b = cli(*args), cli(*args)
    assert a.code == 0, a.err
    first, second = json.loads(a.out), json.loads(b.out)
    for doc in (first, second):  # the audit trail dates the run (to the second)
        doc["audit"].pop("date")
    assert first == second


def test_text_output_has_estimates_errors_and_closed_form(cli, tmp_path):
    r = cli("simulate", "--scheme", "dorfman", "--pool-size", 8, "--prevalence", 0.01,
            "--assay", _assay(tmp_path), "--samples", 400, "--runs", 100, "--seed", 1)
    assert r.code == 0, r.err
    assert "tests per specimen" in r.out and "±" in r.out and "closed form" in r.out
    assert "negative predictive value" in r.out and "not a diagnostic device" in r.out


def test_sweep_prints_a_table_and_writes_csv(cli, tmp_path):
    out = tmp_path / "sweep.csv"
    r = cli("simulate", "--scheme", "dorfman", "--pool-size", "4,8,16", "--prevalence",
            "0.01,0.05", "--assay", _assay(tmp_path), "--samples", 480, "--runs", 40,
            "--seed", 2, "--out", out)
    assert r.code == 0, r.err
    lines = r.out.strip().splitlines()
    assert "prevalence" in lines[1] and "tests/specimen" in lines[1]
    assert len(lines) == 2 + 6 + 2  # title, header, six rows, caution, wrote
    table = pd.read_csv(out)
    assert len(table) == 6 and {"pool_size", "sensitivity_se"} <= set(table.columns)
    r = cli("simulate", "--scheme", "individual", "--prevalence", "0.01,0.1", "--assay",
            _assay(tmp_path), "--samples", 50, "--runs", 10, "--seed", 2, "--json")
    assert r.code == 0 and len(json.loads(r.out)["points"]) == 2


def test_samples_file_with_priors(cli, tmp_path):
    f = tmp_path / "samples.csv"
    f.write_text("sample,prior\n" + "".join(f"s{i},{0.5 if i % 10 == 0 else 0.01}\n"
                                            for i in range(60)), encoding="utf-8")
    r = cli("simulate", "--scheme", "dorfman", "--pool-size", 5, "--assay", _assay(tmp_path),
            "--samples", f, "--runs", 30, "--seed", 1, "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    assert info["prevalence"] is None and "expected" not in info and info["samples"] == 60


def test_simulate_errors(cli, tmp_path):
    assay = _assay(tmp_path)
    bad = [
        ["--scheme", "dorfman", "--prevalence", 0.05, "--samples", 100, "--assay", assay],
        ["--scheme", "bayesian-magic", "--pool-size", 4, "--prevalence", 0.05, "--samples", 10],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", 1.5, "--samples", 10],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", "x", "--samples", 10],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", 0.1, "--samples", "nope.csv"],
        ["--scheme", "dorfman", "--pool-size", 4, "--samples", 10, "--assay", assay],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", 0.1, "--samples", 10,
         "--runs", 0, "--assay", assay],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", 0.1, "--samples", 10,
         "--assay", tmp_path / "missing.toml"],
        ["--scheme", "array", "--pool-size", "4,8", "--prevalence", 0.1, "--samples", 10,
         "--assay", assay],
        ["--scheme", "individual", "--rows", 4, "--prevalence", 0.1, "--samples", 10,
         "--assay", assay],
        ["--scheme", "dorfman", "--pool-size", 4, "--prevalence", 0.1, "--samples", 10,
         "--assay", assay, "--out", tmp_path / "no" / "x.csv"],
    ]
    for args in bad:
        r = cli("simulate", *args)
        assert r.code == 2, args
        errors = [line for line in r.err.splitlines() if "error:" in line]
        assert len(errors) == 1 and "Traceback" not in r.err, r.err


def test_protocol_parameters_print_for_people(cli):
    # the printed summary carries no program notation (None, snake_case keys)
    r = cli("simulate", "--scheme", "bayes", "--samples", 16, "--prevalence", 0.05, "--runs", 2,
            "--seed", 1, "--tests", 4)
    assert r.code == 0, r.err
    first = r.out.splitlines()[0]
    assert "relative information 0.5" in first and "material limit none" in first
    assert "None" not in r.out and "relative_information" not in r.out
