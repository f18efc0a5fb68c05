"""Calibration from past runs with latent truth: recovery, published estimators, identifiability.

Sources: Rogan, W. J. & Gladen, B. (1978). Estimating prevalence from the results of a screening
test. American Journal of Epidemiology 107(1), 71-76: with known Se and Sp, the maximum-likelihood
prevalence from single tests is (p + Sp - 1) / (Se + Sp - 1). Hui, S. L. & Walter, S. D. (1980).
Estimating the error rates of diagnostic tests. Biometrics 36(1), 167-171: without a gold standard
the parameters are identified only when the data carry enough independent rates.
"""
import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.calibration import calibrate_runs
from bayespool.run import Run


def dorfman_runs(rng, n, sizes, prevalence, assay, follow_up=True):
    """Simulated routine screening: pools of the given sizes in turn; every member of a positive
    pool is tested alone (a pool of one) with the same assay. Returns (layout, readouts, truth)."""
    truth = rng.random(n) < prevalence
    layout, readouts = [], []
    start, b = 0, 0
    while start < n:
        k = sizes[b % len(sizes)]
        members = np.arange(start, min(start + k, n))
        start += k
        b += 1
        pool = f"P{b}"
        layout += [(pool, f"S{i}") for i in members]
        y = assay.draw_readouts(np.array([len(members)]), np.array([truth[members].sum()]), rng)[0]
        readouts.append((pool, "positive" if y else "negative"))
        if y and follow_up and len(members) > 1:
            for i in members:
                layout.append((f"I{i}", f"S{i}"))
                yi = assay.draw_readouts(np.array([1]), np.array([int(truth[i])]), rng)[0]
                readouts.append((f"I{i}", "positive" if yi else "negative"))
    return (pd.DataFrame(layout, columns=["pool", "sample"]),
            pd.DataFrame(readouts, columns=["pool", "result"]), truth)


def run_of(layout, readouts):
    return Run.from_frames(layout, readouts)


def test_individual_tests_with_known_assay_give_the_rogan_gladen_prevalence():
    # reference: Rogan & Gladen (1978) estimator, the MLE when Se and Sp are known
    rng = np.random.default_rng(5)
    se, sp = 0.9, 0.97
    n = 600
    truth = rng.random(n) < 0.15
    p_pos = np.where(truth, se, 1 - sp)
    y = rng.random(n) < p_pos
    layout = pd.DataFrame({"pool": [f"T{i}" for i in range(n)], "sample": [f"S{i}" for i in range(n)]})
    readouts = pd.DataFrame({"pool": layout["pool"], "result": np.where(y, "positive", "negative")})
    res = calibrate_runs(run_of(layout, readouts), "constant",
                         fixed={"sensitivity": se, "specificity": sp})
    apparent = y.mean()
    expected = (apparent + sp - 1) / (se + sp - 1)
    assert res.estimate("prevalence") == pytest.approx(expected, abs=1e-5)
    lo, hi = res.interval("prevalence")
    assert lo < expected < hi


def test_perfect_assay_gives_the_binomial_prevalence():
    # common practice: with Se = Sp = 1 every status is known after follow-up, so the MLE of the
    # prevalence is the proportion of positive specimens
    rng = np.random.default_rng(6)
    perfect = Assay(1.0, ConstantSensitivity(1.0))
    layout, readouts, truth = dorfman_runs(rng, 400, [5], 0.08, perfect)
    res = calibrate_runs(run_of(layout, readouts), "constant",
                         fixed={"sensitivity": 1.0, "specificity": 1.0})
    assert res.estimate("prevalence") == pytest.approx(truth.mean(), abs=1e-5)


def test_recovers_constant_assay_and_prevalence_from_dorfman_runs():
    # simulated past runs, truth hidden from the fit: the true values fall in the 95% intervals
    truth = {"prevalence": 0.06, "specificity": 0.98, "sensitivity": 0.92}
    assay = Assay(truth["specificity"], ConstantSensitivity(truth["sensitivity"]))
    covered = dict.fromkeys(truth, 0)
    runs = 8
    for seed in range(runs):
        rng = np.random.default_rng(200 + seed)
        layout, readouts, _ = dorfman_runs(rng, 600, [5], truth["prevalence"], assay)
        res = calibrate_runs(run_of(layout, readouts), "constant")
        assert res.identifiable, res.warnings
        for name, value in truth.items():
            lo, hi = res.interval(name)
            assert lo <= res.estimate(name) <= hi
            covered[name] += lo <= value <= hi
    # 95% intervals: at most one miss in eight per parameter (P(>= 2 misses) is about 6%)
    for name, c in covered.items():
        assert c >= runs - 1, (name, covered)


def test_recovers_dilution_curve_from_two_pool_sizes_with_follow_up():
    # two pool sizes plus individual tests show three dilutions: with se_max fixed the curve is
    # identified and the truth falls in the intervals
    assay = Assay(0.99, DilutionSensitivity(1.0, 30.0, 1.5))
    rng = np.random.default_rng(31)
    layout, readouts, _ = dorfman_runs(rng, 1600, [4, 24], 0.05, assay)
    res = calibrate_runs(run_of(layout, readouts), "dilution", fixed={"se_max": 1.0})
    assert res.identifiable, res.warnings
    for name, value in {"prevalence": 0.05, "specificity": 0.99, "r50": 30.0,
                        "slope": 1.5}.items():
        lo, hi = res.interval(name)
        assert lo <= value <= hi, (name, lo, hi)
    assert res.assay.sensitivity.model == "dilution"


def test_warns_without_individual_tests_and_one_pool_size():
    # Hui & Walter (1980): one positive rate per pool size cannot identify three parameters
    assay = Assay(0.98, ConstantSensitivity(0.9))
    rng = np.random.default_rng(8)
    layout, readouts, _ = dorfman_runs(rng, 1000, [5], 0.06, assay, follow_up=False)
    res = calibrate_runs(run_of(layout, readouts), "constant", intervals="wald")
    assert res.identifiable is False
    text = " ".join(res.warnings)
    assert "cannot separate sensitivity from prevalence" in text
    assert "no individual tests" in text
    assert res.summary()["identifiable"] is False


def test_warns_for_dilution_model_with_one_pool_size():
    # one pool size plus individual tests shows two dilutions for three curve parameters
    assay = Assay(0.99, DilutionSensitivity(0.97, 30.0, 1.5))
    rng = np.random.default_rng(9)
    layout, readouts, _ = dorfman_runs(rng, 800, [8], 0.05, assay)
    res = calibrate_runs(run_of(layout, readouts), "dilution", intervals="wald")
    assert res.identifiable is False
    text = " ".join(res.warnings)
    assert "cannot separate sensitivity from prevalence" in text
    assert "only 2 pool size(s) (1, 8)" in text


def test_identifiable_design_has_no_warning_and_fixing_helps():
    assay = Assay(0.98, ConstantSensitivity(0.9))
    rng = np.random.default_rng(10)
    layout, readouts, _ = dorfman_runs(rng, 1000, [5], 0.06, assay, follow_up=False)
    # fixing two of the three parameters leaves one rate for one parameter: identified
    res = calibrate_runs(run_of(layout, readouts), "constant",
                         fixed={"specificity": 0.98, "sensitivity": 0.9})
    assert res.identifiable, res.warnings
    lo, hi = res.interval("prevalence")
    assert lo <= 0.06 <= hi
    assert res.to_frame().loc["specificity", "fixed"]


def test_latent_assay_file_round_trips(tmp_path):
    assay = Assay(0.98, ConstantSensitivity(0.92))
    rng = np.random.default_rng(11)
    layout, readouts, _ = dorfman_runs(rng, 300, [4], 0.08, assay)
    res = calibrate_runs(run_of(layout, readouts), "constant", intervals="wald")
    path = tmp_path / "assay.toml"
    res.assay.write(path)
    back = Assay.read(path)
    assert back.specificity == pytest.approx(res.assay.specificity)
    assert back.sensitivity.value == pytest.approx(res.estimate("sensitivity"))
    assert back.details["method"] == "runs"
    assert "prevalence" in back.details["estimates"]


def test_pools_with_follow_up_match_the_exact_enumeration():
    # the closed form for a pool with individual follow-up (evidence.py) against the exact
    # decoder's enumeration of the same components (bayespool.decoders.exact, itself checked
    # against pgmpy in test_exact_vs_pgmpy.py)
    import dataclasses

    from bayespool.calibration.evidence import Evidence
    from bayespool.decoders.exact import decode_exact
    from bayespool.decoders.graph import components
    assay = Assay(0.97, DilutionSensitivity(0.95, 12.0, 1.3))
    rng = np.random.default_rng(12)
    layout, readouts, _ = dorfman_runs(rng, 120, [3, 6, 10], 0.2, assay)
    readouts = pd.concat([readouts, readouts.iloc[::7]])  # some replicate readouts
    run = run_of(layout, readouts)
    ev = Evidence(run)
    assert len(ev.exact) == 0 and len(ev.groups) >= 3
    for prevalence in (0.05, 0.2, 0.5):
        ptr, ll = assay.log_likelihood(run.pool_size, run.n_positive, run.n_negative)
        with_prior = dataclasses.replace(run, prior=np.full(run.n_samples, prevalence))
        _, log_z, _, _ = decode_exact(with_prior, ptr, ll, components(run))
        assert ev.loglik(assay, prevalence) == pytest.approx(log_z.sum(), abs=1e-9)


def test_fixed_perfect_assay_that_the_data_contradict_is_an_input_error():
    from bayespool.errors import InputError
    rng = np.random.default_rng(13)
    layout, readouts, _ = dorfman_runs(rng, 400, [5], 0.1, Assay(0.9, ConstantSensitivity(0.7)))
    with pytest.raises(InputError, match="rules out every status vector"):
        calibrate_runs(run_of(layout, readouts), "constant",
                       fixed={"sensitivity": 1.0, "specificity": 1.0})
