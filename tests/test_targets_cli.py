"""Targets, batch expectations, the model check and --strict on the command line (interface.md:
``"batch": {"expected_missed": {"mean", "low", "high"}, ...}``, ``"model_check": {"p_value",
"checks", "warnings"}``), and the closed loop under targets."""
import json

import numpy as np
import pytest

from bayespool.assay import Assay, DilutionSensitivity
from bayespool.simulation.protocol import Tester as CohortTester
from bayespool.simulation.protocols.bayes import BayesianLoop

from .conftest import write_csv

ASSAY = """specificity = 0.99
[sensitivity]
model = "constant"
value = 0.95
"""


@pytest.fixture
def files(tmp_path):
    layout = [("P1", f"s{i}") for i in range(8)] + [("P2", f"s{i}") for i in range(8, 16)]
    layout += [(f"I{i}", f"s{i}") for i in range(8)] + [("P3", "s16")]
    readouts = [("P1", "positive"), ("P2", "negative")]
    readouts += [(f"I{i}", "positive" if i == 3 else "negative") for i in range(8)]
    write_csv(tmp_path / "layout.csv", layout, ["pool", "sample"])
    write_csv(tmp_path / "readouts.csv", readouts, ["pool", "result"])
    write_csv(tmp_path / "samples.csv", [(f"s{i}",) for i in range(18)], ["sample"])
    (tmp_path / "assay.toml").write_text(ASSAY)
    return tmp_path


def args(d, *extra):
    return ["decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--samples", d / "samples.csv", "--assay", d / "assay.toml", "--prevalence", "0.02",
            "--out", d / "post.csv", *extra]


def test_json_has_batch_and_model_check(cli, files):
    r = cli(*args(files, "--json", "--target-sensitivity", "0.95"))
    assert r.code == 0, r.err
    out = json.loads(r.out)
    for key in ("expected_missed", "expected_false_positives", "expected_sensitivity",
                "expected_false_discovery_rate"):
        assert set(out["batch"][key]) == {"mean", "low", "high"}
        assert out["batch"][key]["low"] <= out["batch"][key]["high"]  # the mean may lie outside
    assert {"p_value", "checks", "warnings"} <= set(out["model_check"])
    assert out["rule"]["target_sensitivity"] == 0.95 and out["rule"]["negative_below"] is None
    text = (files / "post.csv").read_text().splitlines()
    assert text[0].startswith("sample,probability,call,call_rule")
    rows = {line.split(",")[0]: line.split(",") for line in text[1:]}
    assert rows["s17"][2] == "untested" and rows["s16"][2] == "untested"  # P3 has no readout
    assert rows["s3"][2] in ("positive", "inconclusive")
    assert out["calls"]["untested"] == 2


def test_strict_exits_3_when_targets_leave_specimens_undecided(cli, files):
    r = cli(*args(files, "--target-sensitivity", "0.999", "--max-false-discovery", "0.001",
                  "--strict"))
    assert r.code == 3
    assert "unreliable" in r.err and "undecided" in r.err
    assert (files / "post.csv").exists()  # the result is written; the status says it is unsafe
    r = cli(*args(files, "--target-sensitivity", "0.999", "--max-false-discovery", "0.001"))
    assert r.code == 0


@pytest.mark.parametrize("flag, value", [("--target-sensitivity", "1.2"),
                                         ("--max-false-discovery", "0"),
                                         ("--target-sensitivity", "x")])
def test_bad_targets_exit_2_naming_the_option(cli, files, flag, value):
    r = cli(*args(files, flag, value))
    assert r.code == 2
    assert len(r.err.strip().splitlines()) == 1
    assert "target" in r.err or "discovery" in r.err


def test_targets_do_not_apply_to_classic_schemes(cli):
    r = cli("simulate", "--scheme", "dorfman", "--pool-size", "8", "--prevalence", "0.02",
            "--samples", "100", "--runs", "2", "--target-sensitivity", "0.95")
    assert r.code == 2 and "does not apply" in r.err


def test_design_optimize_meets_the_target(cli, tmp_path):
    # Kim et al. 2007 closed forms (tested elsewhere): the cheapest pool size whose pooled
    # sensitivity is at least the target
    from bayespool.assay import Assay as A
    from bayespool.design.closed_form import dorfman_expected
    (tmp_path / "a.toml").write_text('specificity = 0.99\n[sensitivity]\nmodel = "dilution"\n'
                                     'se_max = 0.95\nr50 = 40.0\nslope = 1.5\n')
    r = cli("design", "--scheme", "dorfman", "--optimize", "--prevalence", "0.01", "--assay",
            tmp_path / "a.toml", "--target-sensitivity", "0.85", "--json")
    assert r.code == 0, r.err
    opt = json.loads(r.out)["optimum"]
    assay = A.read(tmp_path / "a.toml")
    feasible = [dorfman_expected(0.01, k, assay) for k in range(1, 65)]
    feasible = [e for e in feasible if e.sensitivity >= 0.85]
    best = min(feasible, key=lambda e: e.tests_per_sample)
    assert opt["pool_size"] == best.pool_size and opt["meets_target"]
    assert opt["sensitivity"] >= 0.85


def test_closed_loop_with_targets_decides_everyone_and_meets_the_sensitivity():
    # three cohorts of 200 at 5% with the dilution assay of issue 12: the loop tests until the
    # target rule calls every specimen; realised sensitivity against truth at least 0.95 minus
    # two Monte Carlo standard errors
    assay = Assay(0.99, DilutionSensitivity(0.95, 40.0, 1.5))
    rng = np.random.default_rng(12)
    proto = BayesianLoop(seed=3, target_sensitivity=0.95, max_false_discovery=0.05)
    pos = missed = false_pos = called = 0
    for _ in range(3):
        truth = rng.random(200) < 0.05
        out = proto.run(CohortTester(truth, assay, rng), np.full(200, 0.05))
        assert proto.undecided_at_end == 0
        pos += int(truth.sum())
        missed += int((truth & ~out.calls).sum())
        false_pos += int((~truth & out.calls).sum())
        called += int(out.calls.sum())
    sens = 1 - missed / pos
    se = np.sqrt(0.95 * 0.05 / pos)
    print(f"closed loop: sensitivity {sens:.3f} over {pos} positives, false discoveries "
          f"{false_pos} of {called}")
    assert sens >= 0.95 - 2 * se
    assert false_pos <= max(1, 0.05 * called + 2 * np.sqrt(0.05 * called))
