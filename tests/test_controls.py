"""Controls and plate QC: a failed control leaves its plate's readouts out and the plan retests.

The rule checked is common practice in qPCR: a no-template (negative) control that amplifies, or a
positive control that does not (or reads outside its accepted Ct range), invalidates the run of
that plate, whose results are repeated.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from bayespool.controls import read_run
from bayespool.errors import InputError


def _bench(tmp_path, nc_result="negative", pc_result="positive", pc_ct="28.0",
           extraction=None):
    """16 specimens on plate EXT1 in Dorfman pools of 4; pools P1, P2 read on plate NEXT1,
    P3, P4 on NEXT2; each destination plate has a negative and a positive control."""
    samples = [{"sample": f"S{i}", "plate": "EXT1", "well": f"{'ABCDEFGH'[i % 8]}{i // 8 + 1}",
                "control": ""} for i in range(16)]
    if extraction is not None:
        samples.append({"sample": "XC1", "plate": "EXT1", "well": "H12", "control": "extraction"})
    pd.DataFrame(samples).to_csv(tmp_path / "samples.csv", index=False)
    layout = pd.DataFrame({"pool": [f"P{i // 4 + 1}" for i in range(16)],
                           "sample": [f"S{i}" for i in range(16)]})
    layout.to_csv(tmp_path / "layout.csv", index=False)
    rows = [("P1", "negative", "NEXT1", "A1", ""), ("P2", "positive", "NEXT1", "B1", "30.1"),
            ("P3", "negative", "NEXT2", "A1", ""), ("P4", "negative", "NEXT2", "B1", ""),
            ("", "negative", "NEXT1", "H12", ""), ("", "positive", "NEXT1", "G12", "27.5"),
            ("", nc_result, "NEXT2", "H12", "35" if nc_result == "positive" else ""),
            ("", pc_result, "NEXT2", "G12", pc_ct)]
    if extraction is not None:
        rows.append(("XC1", extraction, "NEXT2", "F12", ""))
    pd.DataFrame(rows, columns=["pool", "result", "plate", "well", "ct"]).to_csv(
        tmp_path / "readouts.csv", index=False)
    pd.DataFrame({"plate": ["NEXT1", "NEXT1", "NEXT2", "NEXT2"],
                  "well": ["H12", "G12", "H12", "G12"],
                  "kind": ["negative", "positive", "negative", "positive"],
                  "ct_min": ["", "20", "", "20"], "ct_max": ["", "32", "", "32"]}).to_csv(
        tmp_path / "controls.csv", index=False)
    return tmp_path


def test_passing_controls_change_nothing(tmp_path):
    d = _bench(tmp_path)
    run, check = read_run(d / "layout.csv", d / "readouts.csv", d / "samples.csv",
                          d / "controls.csv")
    assert check.failed_plates == [] and set(check.plates["status"]) == {"passed"}
    assert run.n_readouts == 4 and run.n_samples == 16


def test_failing_negative_control_invalidates_its_plate(tmp_path):
    d = _bench(tmp_path, nc_result="positive")
    run, check = read_run(d / "layout.csv", d / "readouts.csv", d / "samples.csv",
                          d / "controls.csv")
    assert check.failed_plates == ["NEXT2"]
    assert "negative control" in check.plates.set_index("plate").loc["NEXT2", "detail"]
    assert sorted(check.dropped_pools) == ["P3", "P4"]
    read = run.pool_read
    assert dict(zip(run.pool_ids, read)) == {"P1": True, "P2": True, "P3": False, "P4": False}
    assert any("plate NEXT2 is invalid" in m for m in run.notes)


@pytest.mark.parametrize("result,ct", [("negative", ""), ("positive", "36.5")])
def test_failing_positive_control(tmp_path, result, ct):
    d = _bench(tmp_path, pc_result=result, pc_ct=ct)
    _, check = read_run(d / "layout.csv", d / "readouts.csv", d / "samples.csv",
                        d / "controls.csv")
    assert check.failed_plates == ["NEXT2"]
    detail = check.plates.set_index("plate").loc["NEXT2", "detail"]
    assert ("did not amplify" in detail) if result == "negative" else ("outside 20 to 32" in detail)


def test_extraction_control_in_the_samples_file_vouches_for_its_source_plate(tmp_path):
    d = _bench(tmp_path, extraction="positive")
    run, check = read_run(d / "layout.csv", d / "readouts.csv", d / "samples.csv",
                          d / "controls.csv")
    assert check.failed_plates == ["EXT1"]
    assert run.n_readouts == 0 and run.n_samples == 16  # the control is not a specimen
    assert "XC1" not in set(run.sample_ids)


def test_decode_and_plan_with_a_failed_plate(cli, tmp_path):
    d = _bench(tmp_path, nc_result="positive")
    common = ["--layout", d / "layout.csv", "--readouts", d / "readouts.csv", "--samples",
              d / "samples.csv", "--controls", d / "controls.csv"]
    r = cli("decode", *common, "--out", d / "post.csv", "--report", d / "report.html", "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    assert info["controls"]["failed_plates"] == ["NEXT2"]
    assert "plate NEXT2 is invalid" in r.err
    post = pd.read_csv(d / "post.csv", keep_default_na=False).set_index("sample")
    lost = [f"S{i}" for i in range(8, 16)]
    assert (post.loc[lost, "plate_qc"].str.startswith("untested")).all()
    assert (post.loc[lost, "probability"] == 0.01).all()          # the prior alone
    html = (d / "report.html").read_text(encoding="utf-8")
    assert 'id="controls"' in html and "NEXT2" in html and "qc-failed" in html
    # the plan retests every specimen of the invalidated pools
    r = cli("plan", *common, "--tests", 8, "--max-pool-size", 4, "--out", d / "next.csv")
    assert r.code == 0, r.err
    nxt = pd.read_csv(d / "next.csv")
    assert set(lost) <= set(nxt["sample"])


def test_bad_controls_file(tmp_path, cli):
    d = _bench(tmp_path)
    (d / "controls.csv").write_text("plate,well,kind\nNEXT1,H12,blank\n", encoding="utf-8")
    with pytest.raises(InputError, match="line 2"):
        read_run(d / "layout.csv", d / "readouts.csv", d / "samples.csv", d / "controls.csv")
    r = cli("decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--controls", d / "controls.csv", "--samples", d / "samples.csv", "--out",
            d / "p.csv")
    assert r.code == 2 and "kind" in r.err and "Traceback" not in r.err
