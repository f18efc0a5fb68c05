"""Studies across schemes: one table, common cohorts per prevalence, plots, report, JSON.

Checks against outside references: Dorfman cells against the Kim et al. (2007) closed form
(within 4 Monte Carlo standard errors) and individual testing against Se(1, 1) and Sp of the assay
(common practice: one test per specimen, its readout is the call).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.simulation import simulate, sweep

ASSAY = Assay(0.99, ConstantSensitivity(0.95))


def test_schemes_share_cohorts_and_match_closed_forms():
    study = sweep(["individual", "dorfman", "array"], 96, prevalences=[0.02, 0.08],
                  pool_sizes=[4, 8], assay=ASSAY, runs=300, seed=3)
    t = study.table
    # individual and array have no pool size: one cell each per prevalence; dorfman two
    assert list(t["scheme"]) == ["individual"] * 2 + ["dorfman"] * 4 + ["array"] * 2
    # common random numbers: every scheme at one prevalence saw the same cohorts
    pos = {(s.scheme, s.prevalence, s.parameters.get("pool_size")):
           s.runs_frame["positives"].to_numpy() for s in study.results}
    for p in (0.02, 0.08):
        ref = pos[("individual", p, None)]
        assert all((v == ref).all() for k, v in pos.items() if k[1] == p)
    for row in t[t["scheme"] == "dorfman"].itertuples():
        # Kim et al. (2007) tests per specimen, within 4 Monte Carlo standard errors
        assert abs(row.tests_per_sample - row.expected_tests_per_sample) < \
            4 * row.tests_per_sample_se
    ind = t[t["scheme"] == "individual"]
    assert (abs(ind["specificity"] - 0.99) < 4 * ind["specificity_se"]).all()
    # a cell of a study equals the same cell simulated alone with the study's spawned seed
    alone = simulate("dorfman", 96, prevalence=0.08, assay=ASSAY, runs=300, pool_size=8,
                     seed=np.random.SeedSequence(3).spawn(2)[1])
    cell = next(s for s in study.results if s.scheme == "dorfman" and s.prevalence == 0.08
                and s.parameters["pool_size"] == 8)
    assert cell.runs_frame.equals(alone.runs_frame)


def test_study_command_writes_table_plots_report_and_json(cli, tmp_path):
    a1, a2 = tmp_path / "good.toml", tmp_path / "poor.toml"
    a1.write_text('specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n')
    a2.write_text('specificity = 0.97\n[sensitivity]\nmodel = "constant"\nvalue = 0.85\n')
    out, report = tmp_path / "study.csv", tmp_path / "study.html"
    args = ("simulate", "--scheme", "dorfman,array,bayes", "--samples", 48,
            "--prevalence", "0.02,0.1", "--pool-size", 4, "--assay", f"{a1},{a2}", "--runs", 2,
            "--tests", 12, "--rows", 4, "--cols", 6, "--max-pool-size", 8, "--seed", 5)
    r = cli(*args, "--out", out, "--plots", tmp_path, "--report", report)
    assert r.code == 0, r.err
    table = pd.read_csv(out)
    assert len(table) == 3 * 2 * 2 and set(table["scheme"]) == {"dorfman", "array", "bayes"}
    assert set(table["assay"]) == {str(a1), str(a2)}
    assert {"tests_per_sample_se", "sensitivity_se", "specificity_se"} <= set(table.columns)
    for m in ("tests_per_sample", "sensitivity", "specificity"):
        assert (tmp_path / f"{m}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert "<svg" in (tmp_path / f"{m}.svg").read_text()
    html = report.read_text()
    assert html.count("<svg") >= 3 and "not a diagnostic device" in html and "Audit trail" in html
    r = cli(*args, "--json")
    doc = json.loads(r.out)
    assert len(doc["points"]) == 12 and {p["scheme"] for p in doc["points"]} == {
        "dorfman", "array", "bayes"}
    assert {f["role"] for f in doc["audit"]["inputs"]} == {f"--assay {a1}", f"--assay {a2}"}
    # same seed, same numbers (the table from the first call)
    again = pd.DataFrame([{k: p[k] for k in ("scheme", "prevalence", "tests_per_sample")}
                          for p in doc["points"]])
    assert np.allclose(again["tests_per_sample"], table["tests_per_sample"], rtol=1e-9, atol=0)


def test_study_errors(cli, tmp_path):
    r = cli("simulate", "--scheme", "individual,array", "--samples", 20, "--prevalence", 0.1,
            "--pool-size", 4, "--runs", 2)
    assert r.code == 2 and "--pool-size does not apply" in r.err
    r = cli("simulate", "--scheme", "dorfman,dorfman", "--samples", 20, "--prevalence", 0.1,
            "--pool-size", 4, "--runs", 2)
    assert r.code == 2 and "twice" in r.err
    r = cli("simulate", "--scheme", "dorfman", "--samples", 20, "--prevalence", 0.1,
            "--pool-size", 4, "--runs", 2, "--plots", tmp_path / "nowhere")
    assert r.code == 2 and "--plots" in r.err
