"""Every result type follows one protocol: ``to_frame()`` indexed by the natural ID, ``summary()``
(the dictionary behind --json), ``str()`` (what the command line prints) and a one-line repr.

The outside reference is the interface the outside checks drive (the project's interface
specification, second round: "results have to_frame() (indexed by the natural ID), summary(),
__str__, a one-line __repr__"; the JSON keys each command must print), and the command line's
own output for the same inputs.
"""
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import bayespool
from bayespool.result_protocol import Result, file_frame, json_ready

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets" / "demo"
SURV = ROOT / "datasets" / "surveillance"


@pytest.fixture(scope="module")
def demo():
    run = bayespool.read_run(DEMO / "layout.csv", DEMO / "readouts.csv", DEMO / "samples.csv")
    return run, bayespool.read_assay(DEMO / "assay.toml")


def _posterior(demo):
    return bayespool.decode(*demo, seed=1)


def _plan(demo):
    return bayespool.plan(*demo, tests=4, seed=1)


def _calibration_validation(demo):
    return bayespool.calibrate(DEMO / "invented_validation.csv", model="dilution")


def _calibration_runs(demo):
    return bayespool.calibrate(run=demo[0], model="constant")


def _calibration_ct(demo):
    # readouts simulated from the dilution law of qPCR, as tests/test_ct_calibrate.py does
    from bayespool.calibration.ct_fit import calibrate_ct
    from bayespool.io import FrameTable

    from .test_ct_calibrate import simulate
    rng = np.random.default_rng(4)
    k, ind, y = simulate(rng, 300)
    rows = [(kk, 1, "positive" if np.isfinite(v) else "negative",
             f"{v:.2f}" if np.isfinite(v) else "", f"{c:.2f}") for kk, c, v in zip(k, ind, y)]
    rows += [(8, 0, "negative", "", "")] * 396 + [(8, 0, "positive", "35.5", "")] * 4
    frame = pd.DataFrame(rows, columns=["pool_size", "positives", "result", "ct",
                                        "individual_ct"])
    table = FrameTable(frame, "validation", ["pool_size", "positives", "result"], "validation")
    return calibrate_ct(table, cutoff=40.0)


def _simulation(demo):
    return bayespool.simulate("dorfman", 40, prevalence=0.05, pool_size=4, runs=20, seed=1)


def _sweep(demo):
    return bayespool.sweep(["dorfman", "individual"], 40, prevalences=[0.02, 0.05], pool_size=4,
                           runs=10, seed=1)


def _design(demo):
    return bayespool.make_design("dorfman", 20, pool_size=4)


def _properties(demo):
    return bayespool.make_design("array", 24, rows=4, cols=6).properties


def _optimum(demo):
    return bayespool.optimal_dorfman(0.02)


def _prevalence(demo):
    pools = bayespool.read_pools(SURV / "pools.csv")
    return bayespool.estimate_prevalence(pools, by=["site"], per=1000)


def _regression(demo):
    run = bayespool.read_run(SURV / "layout.csv", SURV / "readouts.csv", SURV / "samples.csv")
    return bayespool.fit_regression(run, bayespool.read_assay(SURV / "assay.toml"),
                                    formula="age + C(exposed)")


def _assay_curve(demo):
    from bayespool import assay_curve
    return assay_curve(demo[1], pool_sizes=[1, 4, 16], source="assay.toml")


# (maker, index names of to_frame(), keys summary() must have)
CASES = {
    "Posterior": (_posterior, ["sample"], {"method", "samples", "calls", "thresholds"}),
    "Plan": (_plan, ["membership"], {"tests", "memberships", "information_bits"}),
    "Calibration (validation)": (_calibration_validation, ["parameter"],
                                 {"kind", "model", "assay", "parameters"}),
    "Calibration (latent)": (_calibration_runs, ["parameter"], {"kind", "model", "parameters"}),
    "CtCalibration": (_calibration_ct, ["parameter"], {"kind", "parameters", "assay"}),
    # interface: simulate --json has at least tests_per_sample, sensitivity, specificity
    "Simulation": (_simulation, ["characteristic"],
                   {"tests_per_sample", "sensitivity", "specificity"}),
    "Sweep": (_sweep, ["setting"], {"points"}),
    "Design": (_design, ["membership"], {"scheme", "samples", "pools", "disjunct"}),
    "DesignProperties": (_properties, ["property"], {"scheme", "samples", "pools"}),
    "DorfmanOptimum": (_optimum, ["pool_size"], {"pool_size", "tests_per_sample", "assay"}),
    # interface: prevalence --json prints {"groups": [...]}; regress {"coefficients": [...]}
    "PrevalenceEstimates": (_prevalence, ["site"], {"groups"}),
    "RegressionFit": (_regression, ["term"], {"coefficients"}),
    # interface: assay --json has "sensitivity": [{"pool_size", "positives", "value"}]
    "AssayCurve": (_assay_curve, ["pool_size", "positives"], {"specificity", "sensitivity"}),
}


@pytest.mark.parametrize("name", list(CASES))
def test_every_result_follows_the_protocol(demo, name):
    make, index, keys = CASES[name]
    result = make(demo)
    assert isinstance(result, Result)
    frame = result.to_frame()
    assert isinstance(frame, pd.DataFrame) and len(frame)
    assert list(frame.index.names) == index
    # the file form puts a named ID back as the first column(s) and keeps every other column
    written = file_frame(frame)
    named = [n for n in index if n != "membership"]
    assert list(written.columns[:len(named)]) == named
    assert len(written) == len(frame)
    summary = result.summary()
    assert isinstance(summary, dict) and keys <= set(summary), set(summary)
    json.loads(json.dumps(json_ready(summary), allow_nan=False))
    text = str(result)
    assert text.strip() and text == text.rstrip("\n")
    line = repr(result)
    assert "\n" not in line and len(line) < 200, line
    assert line.startswith(type(result).__name__ + "(") and line.endswith(")")
    assert "array(" not in line and "DataFrame" not in line


def test_plan_frame_is_the_layout_the_command_line_writes(demo, cli, tmp_path):
    nxt = _plan(demo)
    res = cli("plan", "--layout", DEMO / "layout.csv", "--readouts", DEMO / "readouts.csv",
              "--samples", DEMO / "samples.csv", "--assay", DEMO / "assay.toml", "--tests", "4",
              "--seed", "1", "--out", tmp_path / "next.csv")
    assert res.code == 0, res.err
    written = pd.read_csv(tmp_path / "next.csv", dtype=str, keep_default_na=False)
    frame = file_frame(nxt.to_frame())
    assert list(written.columns) == list(frame.columns)
    assert list(written["pool"]) == list(frame["pool"])
    assert list(written["sample"]) == list(frame["sample"])
    # the printed text is str(plan) with the files written appended
    assert res.out.startswith(str(nxt) + "; wrote ")


def _cli_text(cli, *argv):
    res = cli(*argv)
    assert res.code == 0, res.err
    return res.out


def test_str_is_what_the_command_line_prints(demo, cli, tmp_path):
    run, assay = demo
    post = _posterior(demo)
    out = _cli_text(cli, "decode", "--layout", DEMO / "layout.csv", "--readouts",
                    DEMO / "readouts.csv", "--samples", DEMO / "samples.csv", "--assay",
                    DEMO / "assay.toml", "--seed", "1", "--out", tmp_path / "post.csv")
    assert out == str(post) + f"\nwrote {tmp_path / 'post.csv'}\n"
    from bayespool import assay_curve
    curve = assay_curve(assay, pool_sizes=[1, 4, 16], source=str(DEMO / "assay.toml"))
    out = _cli_text(cli, "assay", DEMO / "assay.toml", "--pool-sizes", "1,4,16")
    assert out == str(curve) + "\n"
    design = _design(demo)
    out = _cli_text(cli, "design", "--scheme", "dorfman", "--samples", "20", "--pool-size", "4",
                    "--out", tmp_path / "layout.csv")
    assert out == str(design) + f"\nwrote {tmp_path / 'layout.csv'}\n"
    opt = _optimum(demo)
    out = _cli_text(cli, "design", "--scheme", "dorfman", "--optimize", "--prevalence", "0.02")
    assert out == str(opt) + "\n"
    sim = _simulation(demo)
    out = _cli_text(cli, "simulate", "--scheme", "dorfman", "--samples", "40", "--prevalence",
                    "0.05", "--pool-size", "4", "--runs", "20", "--seed", "1")
    assert out == str(sim) + "\n"


def test_json_is_the_summary(demo, cli, tmp_path):
    sim = _simulation(demo)
    out = _cli_text(cli, "simulate", "--scheme", "dorfman", "--samples", "40", "--prevalence",
                    "0.05", "--pool-size", "4", "--runs", "20", "--seed", "1", "--json")
    doc = json.loads(out)
    doc.pop("audit")
    assert doc == json.loads(json.dumps(json_ready(sim.summary())))
    curve = _assay_curve(demo)
    out = _cli_text(cli, "assay", DEMO / "assay.toml", "--pool-sizes", "1,4,16", "--json")
    assert json.loads(out) == json.loads(json.dumps(curve.summary()))


def test_write_report_takes_the_plan_and_renders_what_its_table_renders(demo, tmp_path):
    from bayespool.errors import InputError
    from bayespool.report import build_report
    run, assay = demo
    post = _posterior(demo)
    nxt = _plan(demo)
    path = bayespool.write_report(tmp_path / "r.html", run=run, assay=assay, posterior=post,
                                  plan=nxt, created="2026-01-01")
    same = build_report(run, assay, post, file_frame(nxt.to_frame()), created="2026-01-01",
                        file_name="r.html")
    assert path.read_text(encoding="utf-8") == same
    # a DataFrame is not a result: the error names the parameter, and nothing is written
    with pytest.raises(InputError) as info:
        bayespool.write_report(tmp_path / "frame.html", posterior=post, plan=nxt.to_frame())
    assert "plan" in info.value.parameters and not (tmp_path / "frame.html").exists()


def test_one_specimen_shows_the_call_of_the_table_under_batch_targets(demo):
    # the targets move calls away from the two thresholds (Müller et al. 2004 expected FDR/FNR
    # rule): the O(1) accessor must show the same call as the table, specimen by specimen
    run, assay = demo
    post = bayespool.decode(run, assay, target_sensitivity=0.99, max_false_discovery=0.2)
    frame = post.to_frame()
    calls = {sid: post[sid]["call"] for sid in frame.index}
    assert calls == frame["call"].to_dict()
    plain = _posterior(demo).to_frame()["call"]
    assert (frame["call"] != plain).any()  # the rule in force matters here
