"""The calibrate command end to end: files in, assay file and plots out, errors with file:line:column.

Checks of the numbers themselves are in test_calibrate_reference.py (statsmodels) and
test_calibrate_coverage.py; here the command line is checked to carry them faithfully, to write an
assay file that the assay reader and the decoder accept, and to refuse bad files with exit 2.
"""
import json

import numpy as np
import pytest

from bayespool.assay import Assay, DilutionSensitivity
from bayespool.calibration import calibrate_validation
from bayespool.calibration.validation import ValidationData

from .conftest import write_csv
from .test_calibrate_latent import dorfman_runs

HEADER = ["pool_size", "positives", "result"]


def validation_rows(seed=0, se_max=0.97, r50=25.0, slope=1.6):
    """Simulated validation readouts (a test fixture, not reference data)."""
    rng = np.random.default_rng(seed)
    assay = Assay(0.99, DilutionSensitivity(se_max, r50, slope))
    k = np.concatenate([np.repeat([1, 4, 8, 16, 32, 32], 30), np.full(150, 8)])
    d = np.concatenate([np.repeat([1, 1, 1, 1, 1, 2], 30), np.zeros(150, int)])
    y = assay.draw_readouts(k, d, rng)
    return [(a, b, "positive" if c else "negative") for a, b, c in zip(k, d, y)]


@pytest.fixture
def validation(tmp_path):
    return write_csv(tmp_path / "validation.csv", validation_rows(), HEADER)


def test_calibrate_writes_an_assay_file_that_decode_reads(cli, tmp_path, validation):
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", validation, "--model", "dilution", "--out", out)
    assert r.code == 0, r.err
    assert "profile likelihood" in r.out and "Clopper-Pearson" in r.out
    assay = Assay.read(out)
    assert assay.sensitivity.model == "dilution"
    assert assay.details["method"] == "validation"
    assert assay.details["readouts_used"] == len(validation_rows())
    assert assay.details["source_validation"] == str(validation)
    assert set(assay.details["estimates"]) == {"specificity", "se_max", "r50", "slope"}
    assert "date" in assay.details and "log_likelihood" in assay.details
    # the same numbers as the library
    lib = calibrate_validation(ValidationData.read(validation), "dilution")
    assert assay.sensitivity.r50 == pytest.approx(lib.estimate("r50"), rel=1e-9)
    assert assay.details["estimates"]["r50"]["lower"] == pytest.approx(lib.interval("r50")[0])
    # plots beside the assay file
    png = tmp_path / "assay-curve.png"
    svg = tmp_path / "assay-curve.svg"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "<svg" in svg.read_text(encoding="utf-8")
    # decode accepts the file and ignores the [fit] table
    write_csv(tmp_path / "layout.csv", [("P1", "a"), ("P1", "b"), ("P2", "b"), ("P2", "c")],
              ["pool", "sample"])
    write_csv(tmp_path / "readouts.csv", [("P1", "positive"), ("P2", "negative")],
              ["pool", "result"])
    r = cli("decode", "--layout", tmp_path / "layout.csv", "--readouts",
            tmp_path / "readouts.csv", "--assay", out, "--out", tmp_path / "post.csv")
    assert r.code == 0, r.err


def test_json_summary_and_best_model_by_aic(cli, tmp_path, validation):
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", validation, "--model", "best", "--out", out, "--json",
            "--no-plot", "--gof-draws", "30", "--seed", "3")
    assert r.code == 0, r.err
    summary = json.loads(r.out)
    table = {row["model"]: row for row in summary["comparison"]}
    best = min((row for row in table.values() if row["aic"] is not None),
               key=lambda row: row["aic"])
    assert summary["model"] == best["model"] and best["chosen"]
    assert summary["goodness_of_fit"]["bootstrap_draws"] == 30
    assert 0 < summary["goodness_of_fit"]["bootstrap_p_value"] <= 1
    assert summary["parameters"]["specificity"]["interval"] == "Clopper-Pearson"
    assert not (tmp_path / "assay-curve.png").exists()
    assert Assay.read(out).sensitivity.model == summary["model"]


def test_fixed_se_max_and_wald_intervals(cli, tmp_path, validation):
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", validation, "--model", "dilution", "--fix",
            "se_max=1", "--intervals", "wald", "--out", out, "--json", "--no-plot")
    assert r.code == 0, r.err
    s = json.loads(r.out)
    assert s["parameters"]["se_max"] == {"estimate": 1.0, "lower": 1.0, "upper": 1.0,
                                         "interval": "fixed", "fixed": True}
    assert s["parameters"]["slope"]["interval"].startswith("Wald")
    assert Assay.read(out).sensitivity.se_max == 1.0


def test_past_runs_fit_and_identifiability_warning(cli, tmp_path):
    rng = np.random.default_rng(4)
    assay = Assay(0.98, DilutionSensitivity(0.97, 30.0, 1.5))
    layout, readouts, _ = dorfman_runs(rng, 400, [5], 0.06, assay, follow_up=False)
    layout.to_csv(tmp_path / "layout.csv", index=False)
    readouts.to_csv(tmp_path / "readouts.csv", index=False)
    out = tmp_path / "assay.toml"
    # an unidentified fit becomes an assay file only when asked for (tests/test_calibrate_identify.py)
    r = cli("calibrate", "--layout", tmp_path / "layout.csv", "--readouts",
            tmp_path / "readouts.csv", "--model", "constant", "--intervals", "wald", "--out", out,
            "--allow-unidentified")
    assert r.code == 0, r.err
    assert "cannot separate sensitivity from prevalence" in r.out
    assert "past runs" in r.out
    back = Assay.read(out)
    assert back.details["method"] == "runs" and "prevalence" in back.details["estimates"]


BAD_FILES = [
    # (rows or raw text, expected piece of message, line, column)
    ("pool_size,result\n4,positive\n", "lacks column 'positives'", 1, None),
    ("pool_size,positives,result\n4,1,positive\n4,5,negative\n", "exceeds pool_size", 3, 2),
    ("pool_size,positives,result\n4,-1,positive\n", "is negative", 2, 2),
    ("pool_size,positives,result\n-4,0,negative\n", "is negative", 2, 1),
    ("pool_size,positives,result\n0,0,negative\n", "below 1", 2, 1),
    ("pool_size,positives,result\n4,1,positive\nfour,1,positive\n", "'four' is not a whole number",
     3, 1),
    ("pool_size,positives,result\n4,1.5,positive\n", "'1.5' is not a whole number", 2, 2),
    ("pool_size,positives,result\n4,,positive\n", "positives is empty", 2, 2),
    ("pool_size,positives,result\n4,1,positive\n4,1,maybe\n", "result 'maybe'", 3, 3),
    ("pool_size,positives,result\n", "no rows", None, None),
    ("", "empty", None, None),
]


@pytest.mark.parametrize("text,message,line,column", BAD_FILES)
def test_bad_validation_files_exit_2_with_file_line_and_column(cli, tmp_path, text, message,
                                                               line, column):
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "assay.toml"
    out.write_text("specificity = 0.5\n", encoding="utf-8")  # an existing output stays untouched
    r = cli("calibrate", "--validation", path, "--out", out)
    assert r.code == 2
    assert "Traceback" not in r.err
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    assert str(path) in r.err and message in r.err, r.err
    if line is not None:
        assert f"line {line}" in r.err, r.err
    if column is not None:
        assert f"column {column}" in r.err, r.err
    assert out.read_text(encoding="utf-8") == "specificity = 0.5\n"
    assert not (tmp_path / "assay-curve.png").exists()


def test_not_utf8_validation_file(cli, tmp_path):
    path = tmp_path / "bad.csv"
    path.write_bytes(b"pool_size,positives,result\n4,1,pos\xe9\n")
    r = cli("calibrate", "--validation", path, "--out", tmp_path / "a.toml")
    assert r.code == 2 and "not UTF-8" in r.err and "line 2" in r.err


@pytest.mark.parametrize("args,message", [
    (["--out", "A"], "give --validation, or --layout and --readouts"),
    (["--validation", "V", "--layout", "L", "--readouts", "R", "--out", "A"], "not both"),
    (["--validation", "V", "--fix", "se_max", "--out", "A"], "expected NAME=VALUE"),
    (["--validation", "V", "--fix", "colour=1", "--out", "A"], "cannot fix 'colour'"),
    (["--validation", "V", "--fix", "se_max=2", "--out", "A"], "se_max = 2.0 must be in (0, 1]"),
    (["--validation", "V", "--level", "1.2", "--out", "A"], "level"),
    (["--validation", "V", "--out", "nowhere/A.toml"], "does not exist"),
])
def test_usage_errors_exit_2(cli, tmp_path, validation, args, message):
    args = [str(validation) if a == "V" else str(tmp_path / "a.toml") if a == "A" else a
            for a in args]
    r = cli("calibrate", *args)
    assert r.code == 2
    assert message in r.err, r.err
    assert "Traceback" not in r.err


def test_validation_without_negative_pools_needs_a_fixed_specificity(cli, tmp_path):
    rows = [(4, 1, "positive")] * 20 + [(16, 1, "negative")] * 5 + [(16, 1, "positive")] * 15
    path = write_csv(tmp_path / "v.csv", rows, HEADER)
    r = cli("calibrate", "--validation", path, "--model", "constant", "--out", tmp_path / "a.toml")
    assert r.code == 2 and "positives = 0" in r.err and "--fix specificity" in r.err
    r = cli("calibrate", "--validation", path, "--model", "constant", "--fix", "specificity=0.995",
            "--out", tmp_path / "a.toml", "--no-plot")
    assert r.code == 0, r.err
    assert Assay.read(tmp_path / "a.toml").specificity == 0.995


def test_dilution_model_needs_enough_dilutions(cli, tmp_path):
    rows = [(8, 0, "negative")] * 30 + [(4, 1, "positive")] * 20 + [(8, 1, "positive")] * 20
    path = write_csv(tmp_path / "v.csv", rows, HEADER)
    r = cli("calibrate", "--validation", path, "--model", "dilution", "--out", tmp_path / "a.toml")
    assert r.code == 2 and "only 2 distinct dilution" in r.err
    # best leaves the dilution family out and says why
    r = cli("calibrate", "--validation", path, "--out", tmp_path / "a.toml", "--json", "--no-plot")
    assert r.code == 0, r.err
    notes = {row["model"]: row["note"] for row in json.loads(r.out)["comparison"]}
    assert "distinct dilution" in notes["dilution"]


def test_invalid_rows_are_skipped_with_a_note(cli, tmp_path):
    rows = validation_rows() + [(4, 1, "invalid")]
    path = write_csv(tmp_path / "v.csv", rows, HEADER)
    r = cli("calibrate", "--validation", path, "--model", "constant", "--out", tmp_path / "a.toml",
            "--no-plot")
    assert r.code == 0, r.err
    assert "1 invalid readout(s) skipped" in r.out
    assert Assay.read(tmp_path / "a.toml").details["rows_skipped"] == 1


def test_report_and_plot_paths_checked_before_any_work(cli, tmp_path, validation):
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", validation, "--out", out, "--report",
            tmp_path / "missing" / "r.html")
    assert r.code == 2 and "does not exist" in r.err
    assert not out.exists()
    r = cli("calibrate", "--validation", validation, "--out", out, "--report",
            tmp_path / "r.html", "--model", "dilution")
    assert r.code == 0, r.err
    html = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert 'id="calibration"' in html and "not a diagnostic device" in html
    assert "profile likelihood" in html


def test_table_model_without_single_positive_cells_warns_and_decodes(cli, tmp_path):
    # pool size 8 validated only with 2 positives: its entry is used from 1 positive up, with a
    # warning; the written table covers 1 positive so decode accepts it
    rows = ([(8, 0, "negative")] * 40 + [(4, 1, "positive")] * 18 + [(4, 1, "negative")] * 2
            + [(8, 2, "positive")] * 15 + [(8, 2, "negative")] * 5)
    path = write_csv(tmp_path / "v.csv", rows, HEADER)
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", path, "--model", "table", "--out", out, "--no-plot")
    assert r.code == 0, r.err
    assert "pool size 8 has no validation readouts with 1 positive" in r.out
    entries = {(k, d): v for k, d, v in Assay.read(out).sensitivity.entries}
    assert set(entries) == {(4, 1), (8, 1)}
    assert entries[(8, 1)] == pytest.approx(0.75, abs=1e-9)  # 15 of 20 (maximum likelihood)
    assert entries[(4, 1)] == pytest.approx(0.9, abs=1e-9)   # 18 of 20


def test_demo_calibrates_from_its_invented_validation_set(tmp_path):
    from bayespool.calibration import calibrate_validation
    from bayespool.calibration.validation import ValidationData
    from bayespool.demo import run_demo
    result = run_demo(tmp_path)
    for name in ("invented_validation.csv", "assay.toml", "assay-curve.png", "assay-curve.svg"):
        assert (tmp_path / name).exists()
    assert Assay.read(tmp_path / "assay.toml").details["method"] == "validation"
    # the demo fits the Ct load model (its validation set has ct and individual_ct columns) ...
    assert Assay.read(tmp_path / "assay.toml").ct is not None
    assert result.calibration.summary()["kind"] == "validation with Ct"
    # ... and the same set's pool_size, positives and result columns fit a binary family
    binary = calibrate_validation(ValidationData.read(tmp_path / "invented_validation.csv"),
                                  "best")
    assert binary.model in ("constant", "dilution", "table")


def test_fixed_values_that_rule_out_the_data_exit_2(cli, tmp_path, validation):
    r = cli("calibrate", "--validation", validation, "--fix", "specificity=1", "--out",
            tmp_path / "a.toml")
    assert r.code == 2 and "specificity fixed at 1" in r.err
    r = cli("calibrate", "--validation", validation, "--model", "constant", "--fix",
            "sensitivity=1", "--out", tmp_path / "a.toml")
    assert r.code == 2 and "can explain the readouts" in r.err
    assert not (tmp_path / "a.toml").exists()
