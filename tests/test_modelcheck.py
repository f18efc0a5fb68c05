"""The check that the assay model fits the readouts (posterior predictive check, Gelman, Meng &
Stern 1996; partial predictive for follow-up tests, Bayarri & Berger 2000).

Readouts simulated from the assay file itself must rarely raise an alarm (at most 5% of runs; the
alarm level is 1%), and readouts simulated with a specificity of 0.95 or a sensitivity of 0.75
while the file says 0.995 and 0.95 must raise it in at least 90% of runs of 2,000 specimens
(two-stage Dorfman in pools of 4 at prevalence 5%). Measured with these seeds: 1 of 30, 28 of 30
and 30 of 30 (a power figure of this design, not a guarantee for every design).
"""
import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.decoders import decode
from bayespool.modelcheck import check_model

from .test_decisions import two_stage_run

FILE = Assay(0.995, ConstantSensitivity(0.95))
RUNS = 30


def alarms(truth, seed):
    rng = np.random.default_rng(seed)
    out = 0
    for r in range(RUNS):
        run, _ = two_stage_run(rng, 2000, 4, 0.05, truth)
        check = check_model(run, FILE, seed=r)
        out += check.failed
        assert (not check.failed) == (not check.warnings)
    return out


def test_readouts_from_the_assay_file_rarely_alarm():
    n = alarms(FILE, 11)
    print(f"false alarms: {n} of {RUNS}")
    assert n <= 0.05 * RUNS


@pytest.mark.parametrize("truth, what", [(Assay(0.95, ConstantSensitivity(0.95)), "specificity"),
                                         (Assay(0.995, ConstantSensitivity(0.75)), "sensitivity")])
def test_a_wrong_assay_file_is_flagged(truth, what):
    n = alarms(truth, 12)
    print(f"true {what} differs from the file: alarms in {n} of {RUNS}")
    assert n >= 0.9 * RUNS


def test_warning_names_the_misfit_and_suggests_calibrate():
    rng = np.random.default_rng(5)
    run, _ = two_stage_run(rng, 2000, 4, 0.05, Assay(0.9, ConstantSensitivity(0.95)))
    post = decode(run, FILE)
    assert post.model_check["p_value"] < 0.01
    text = " ".join(post.model_check["warnings"])
    assert "calibrate" in text and "specificity" in text
    assert {"p_value", "checks", "warnings"} <= set(post.model_check)
    assert post.problems()
