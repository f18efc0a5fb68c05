"""``bayespool plan`` end to end (interface.md): first stage, follow-up, decided runs, bad input."""
import json

import pandas as pd

from .conftest import write_csv


def first_stage_files(tmp_path, n=40):
    lay = write_csv(tmp_path / "layout.csv", [], ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv", [], ["pool", "result"])
    sm = write_csv(tmp_path / "samples.csv", [[f"S{i}"] for i in range(n)], ["sample"])
    return lay, rd, sm


def test_first_stage_from_empty_layout(cli, tmp_path):
    lay, rd, sm = first_stage_files(tmp_path)
    out = tmp_path / "next.csv"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--samples", sm, "--prevalence", 0.02,
            "--tests", 3, "--max-pool-size", 16, "--out", out, "--seed", 1)
    assert r.code == 0, r.err
    frame = pd.read_csv(out, dtype=str)
    assert list(frame.columns[:2]) == ["pool", "sample"]
    assert {"positive_probability", "information_bits", "kind"} <= set(frame.columns)
    assert frame["pool"].nunique() == 3
    assert frame.groupby("pool").size().max() <= 16
    assert "planned 3 pools" in r.out


def test_follow_up_uses_fresh_ids_and_json(cli, tmp_path):
    rows = [[f"P{t}", f"S{4 * t + j}"] for t in range(6) for j in range(4)]
    lay = write_csv(tmp_path / "layout.csv", rows, ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv",
                   [["P0", "positive"], ["P1", "negative"], ["P2", "pos"], ["P3", "neg"],
                    ["P4", "negative"], ["P5", "negative"]], ["pool", "result"])
    assay = tmp_path / "assay.toml"
    assay.write_text('specificity = 0.99\n[sensitivity]\nmodel = "dilution"\nse_max = 0.97\n'
                     'r50 = 10.0\nslope = 1.5\n', encoding="utf-8")
    out = tmp_path / "next.csv"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--assay", assay, "--prevalence", 0.05,
            "--tests", 6, "--out", out, "--seed", 3, "--json")
    assert r.code == 0, r.err
    summary = json.loads(r.out)
    frame = pd.read_csv(out, dtype=str, keep_default_na=False)
    assert summary["tests"] == frame["pool"].nunique() <= 6
    assert not set(frame["pool"]) & {f"P{t}" for t in range(6)}
    # only members of the two positive pools are undecided and planned
    assert set(frame["sample"]) <= {f"S{i}" for i in list(range(4)) + list(range(8, 12))}
    # reproducible with a seed
    out2 = tmp_path / "again.csv"
    cli("plan", "--layout", lay, "--readouts", rd, "--assay", assay, "--prevalence", 0.05,
        "--tests", 6, "--out", out2, "--seed", 3)
    assert out.read_text() == out2.read_text()


def test_decided_run_writes_header_only_and_says_so(cli, tmp_path):
    lay = write_csv(tmp_path / "layout.csv", [["P0", "S0"], ["P0", "S1"]], ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv", [["P0", "negative"]], ["pool", "result"])
    assay = tmp_path / "assay.toml"
    assay.write_text('specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 1.0\n',
                     encoding="utf-8")
    out = tmp_path / "next.csv"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--assay", assay, "--tests", 4,
            "--out", out)
    assert r.code == 0, r.err
    assert "every sample is decided" in r.out
    assert out.read_text().strip().split(",")[:2] == ["pool", "sample"]
    assert len(out.read_text().strip().splitlines()) == 1


def test_bad_input_is_one_line_exit_2_and_no_output(cli, tmp_path):
    lay, rd, _ = first_stage_files(tmp_path)
    out = tmp_path / "next.csv"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--tests", 4, "--out", out)
    errors = [line for line in r.err.splitlines() if ": error: " in line]
    assert r.code == 2 and len(errors) == 1 and "no samples" in errors[0]
    assert not out.exists()
    lay, rd, sm = first_stage_files(tmp_path)
    r = cli("plan", "--layout", lay, "--readouts", rd, "--samples", sm, "--tests", 0,
            "--out", out)
    assert r.code == 2 and "--tests" in r.err and "Traceback" not in r.err
    assert not out.exists()
    out.write_text("keep me\n")
    r = cli("plan", "--layout", lay, "--readouts", rd, "--samples", sm, "--tests", 4,
            "--max-pool-size", -1, "--out", out)
    assert r.code == 2 and out.read_text() == "keep me\n"
    r = cli("plan", "--layout", lay, "--samples", sm, "--out", out)
    assert r.code == 2 and "--tests" in r.err



def test_report_includes_the_planned_pools(cli, tmp_path):
    lay, rd, sm = first_stage_files(tmp_path)
    out, html = tmp_path / "next.csv", tmp_path / "plan.html"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--samples", sm, "--tests", 2,
            "--out", out, "--report", html, "--seed", 2)
    assert r.code == 0, r.err
    pools = pd.read_csv(out, dtype=str)["pool"].unique()
    page = html.read_text(encoding="utf-8")
    assert all(p in page for p in pools)
