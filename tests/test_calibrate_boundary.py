"""Calibration never writes a certainty it did not see, and decode can integrate over the fit.

References: the Jeffreys posterior of a binomial rate, Beta(x + 1/2, n - x + 1/2) (Jeffreys 1946,
Proc. R. Soc. A 186; Brown, Cai & DasGupta 2001, Statistical Science 16(2)), computed with
scipy.stats.beta; the profile deviance against scipy.stats.chi2; integrals by scipy.integrate.quad.
The validation sets and Dorfman runs are simulated test fixtures, not reference data.
"""
import json
import tomllib

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.assay_spread import integrate as integrate_assay
from bayespool.calibration import calibrate_validation
from bayespool.calibration.validation import ValidationData
from bayespool.decoders import decode
from bayespool.errors import InputError
from bayespool.run import Run

from .conftest import write_csv

TRUE_SP, TRUE_SE = 0.99, 0.95


def clean_control_sets(count, n_controls=100, seed=0):
    """Validation sets (true Sp 0.99) whose negative controls happen to hold no false positive."""
    rng = np.random.default_rng(seed)
    out = []
    while len(out) < count:
        controls = rng.random(n_controls) < 1 - TRUE_SP
        if controls.any():
            continue
        detected = rng.random(120) < TRUE_SE
        k = np.concatenate([np.full(n_controls, 8), np.repeat([1, 4, 8, 16], 30)])
        d = np.concatenate([np.zeros(n_controls, int), np.ones(120, int)])
        out.append(ValidationData.from_arrays(k, d, np.concatenate([controls, detected])))
    return out


def test_clean_controls_give_a_specificity_strictly_below_one():
    # Jeffreys posterior median for 100 negatives out of 100 (scipy.stats.beta)
    expected = stats.beta.ppf(0.5, 100.5, 0.5)
    for data in clean_control_sets(5):
        cal = calibrate_validation(data, "constant")
        assert cal.estimate("specificity") == 1.0            # the ML value, kept
        assert cal.assay.specificity < 1.0
        assert cal.assay.specificity == pytest.approx(expected, rel=1e-12)
        fit = cal.assay.details["estimates"]["specificity"]
        assert fit["estimate"] == 1.0 and fit["written"] == cal.assay.specificity
        assert "Jeffreys" in fit["rule"]
        assert any("0.997734" in w for w in cal.warnings)


def test_the_assay_file_holds_the_inside_value_and_the_ml_value(cli, tmp_path):
    data = clean_control_sets(1, seed=3)[0]
    rows = [(k, d, "positive" if r else "negative")
            for k, d, r in zip(data.pool_size, data.positives, data.result)]
    path = write_csv(tmp_path / "validation.csv", rows, ["pool_size", "positives", "result"])
    out = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", path, "--model", "constant", "--out", out)
    assert r.code == 0, r.err
    written = tomllib.loads(out.read_text())
    assert 0.0 < written["specificity"] < 1.0
    assert written["fit"]["estimates"]["specificity"]["estimate"] == 1.0
    assert Assay.read(out).specificity == written["specificity"]


def test_a_sensitivity_on_the_edge_goes_to_the_50_percent_profile_limit():
    # constant Se, every one of n pooled positives detected: the profile is the binomial likelihood
    # n log(Se), so the 50% limit solves 2 n (-log Se) = median of chi-square(1) (scipy.stats.chi2)
    n = 40
    k = np.concatenate([np.full(50, 4), np.full(n, 4)])
    d = np.concatenate([np.zeros(50, int), np.ones(n, int)])
    res = np.concatenate([np.zeros(49, bool), [True], np.ones(n, bool)])
    cal = calibrate_validation(ValidationData.from_arrays(k, d, res), "constant")
    assert cal.estimate("sensitivity") == 1.0
    expected = np.exp(-stats.chi2.ppf(0.5, 1) / (2 * n))
    assert cal.assay.sensitivity.value == pytest.approx(expected, abs=1e-6)
    # and it agrees with the Jeffreys median of the same count to first order (0.2275 / n)
    assert cal.assay.sensitivity.value == pytest.approx(stats.beta.ppf(0.5, n + 0.5, 0.5),
                                                        abs=5e-5)
    assert cal.assay.specificity == 49 / 50  # inside: the ML value is written as it is


def test_se_max_on_the_edge_is_written_inside():
    rng = np.random.default_rng(7)
    sizes = np.repeat([1, 2, 4, 8, 16, 32, 64], 40)
    truth = 1.0 / (1.0 + (sizes / 20.0) ** 2)
    res = rng.random(len(sizes)) < truth
    res[sizes <= 2] = True  # every low-dilution pool detected: se_max on its edge
    k = np.concatenate([np.full(60, 4), sizes])
    d = np.concatenate([np.zeros(60, int), np.ones(len(sizes), int)])
    data = ValidationData.from_arrays(k, d, np.concatenate([np.zeros(60, bool), res]))
    cal = calibrate_validation(data, "dilution", intervals="wald")
    assert cal.estimate("se_max") == 1.0
    se_max = cal.assay.sensitivity.se_max
    assert 0.95 < se_max < 1.0
    # at the written se_max the profile deviance is the median of chi-square(1)
    from bayespool.calibration.fit import fit_sensitivity
    cells = data.sensitivity_cells()
    free = fit_sensitivity(cells, "dilution")
    held = fit_sensitivity(cells, "dilution", {"se_max": se_max})
    deviance = 2 * (free.loglik - held.loglik)
    assert deviance == pytest.approx(stats.chi2.ppf(0.5, 1), abs=1e-4)


def dorfman_two_stage(n=4000, k=8, prevalence=0.02, seed=11):
    """Dorfman screening (pools of k, members of positive pools retested alone), true Sp 0.99."""
    rng = np.random.default_rng(seed)
    x = rng.random(n) < prevalence
    layout, readouts = [], []
    for b in range(n // k):
        members = range(b * k, (b + 1) * k)
        pool = f"P{b}"
        layout += [(pool, f"S{i}") for i in members]
        pos = rng.random() < (TRUE_SE if x[list(members)].any() else 1 - TRUE_SP)
        readouts.append((pool, "positive" if pos else "negative"))
        if pos:
            for i in members:
                single = f"R{i}"
                layout.append((single, f"S{i}"))
                hit = rng.random() < (TRUE_SE if x[i] else 1 - TRUE_SP)
                readouts.append((single, "positive" if hit else "negative"))
    return (pd.DataFrame(layout, columns=["pool", "sample"]),
            pd.DataFrame(readouts, columns=["pool", "result"]), x)


def by_sample(frame):
    return frame.set_index("sample") if "sample" in frame.columns else frame


def test_decode_calls_no_positive_at_certainty_from_a_lone_positive_pool():
    layout, readouts, truth = dorfman_two_stage()
    run = Run.from_frames(layout, readouts, prevalence=0.02)
    cal = calibrate_validation(clean_control_sets(1, seed=5)[0], "constant")
    post = decode(run, cal.assay, method="exact")
    frame = by_sample(post.to_frame())
    # specimens whose only positive evidence is their own lone retest
    pos_single = readouts[readouts["pool"].str.startswith("R")
                          & (readouts["result"] == "positive")]
    lone = [s.replace("R", "S", 1) for s in pos_single["pool"]]
    assert len(lone) >= 20
    assert frame.loc[lone, "probability"].max() < 0.9995
    # the maximum-likelihood assay (Sp = 1) would have called them certain: the test can fail
    ml = Assay(1.0, cal.assay.sensitivity)
    ml_frame = by_sample(decode(run, ml, method="exact").to_frame())
    assert ml_frame.loc[lone, "probability"].min() > 0.9995


def test_integrated_specificity_term_against_quadrature():
    cal = calibrate_validation(clean_control_sets(1, seed=9)[0], "constant")
    a, b = cal.assay.details["uncertainty"]["specificity_beta"]
    assert (a, b) == (100.5, 0.5)
    ia = integrate_assay(cal.assay)
    sizes = np.array([4, 4, 4])
    npos, nneg = np.array([1, 0, 2]), np.array([0, 2, 1])
    ptr, values = ia.log_likelihood(sizes, npos, nneg)
    dens = stats.beta(a, b).pdf
    for t in range(3):
        want, _ = integrate.quad(lambda s: s ** nneg[t] * (1 - s) ** npos[t] * dens(s), 0, 1,
                                 points=[0.99, 0.999], limit=200)
        assert np.exp(values[ptr[t]]) == pytest.approx(want, rel=1e-6)


def test_sensitivity_draws_follow_the_jeffreys_posterior():
    # constant family: the posterior under Jeffreys' prior is Beta(x + 1/2, n - x + 1/2) exactly
    data = clean_control_sets(1, seed=2)[0]
    cal = calibrate_validation(data, "constant")
    cells = data.sensitivity_cells()
    x, n = cells.detected.sum(), cells.trials.sum()
    draws = np.array(cal.assay.details["uncertainty"]["sensitivity_draws"])[:, 0]
    se = 1 / (1 + np.exp(-draws))
    post = stats.beta(x + 0.5, n - x + 0.5)
    assert se.mean() == pytest.approx(post.mean(), abs=4 * post.std() / np.sqrt(len(se) / 4))
    assert stats.kstest(se, post.cdf).pvalue > 1e-3


def test_decode_with_assay_uncertainty_says_so(cli, tmp_path):
    cal = calibrate_validation(clean_control_sets(1, seed=4)[0], "constant")
    assay_path = tmp_path / "assay.toml"
    cal.assay.write(assay_path)
    layout, readouts, _ = dorfman_two_stage(n=400, seed=2)
    lay = tmp_path / "layout.csv"
    rd = tmp_path / "readouts.csv"
    layout.to_csv(lay, index=False)
    readouts.to_csv(rd, index=False)
    out = tmp_path / "post.csv"
    r = cli("decode", "--layout", lay, "--readouts", rd, "--assay", assay_path,
            "--assay-uncertainty", "--out", out, "--json")
    assert r.code == 0, r.err
    summary = json.loads(r.out)
    assert summary["assay_uncertainty"] is True
    assert "integrated over the fit's uncertainty" in summary["assay"]
    assert "--assay-uncertainty" in r.err
    # a hand-written assay has no fitted uncertainty: exit 2 with one line
    plain = tmp_path / "plain.toml"
    Assay(0.99, ConstantSensitivity(0.95)).write(plain)
    r = cli("decode", "--layout", lay, "--readouts", rd, "--assay", plain,
            "--assay-uncertainty", "--out", tmp_path / "p2.csv")
    assert r.code == 2 and "[fit.uncertainty]" in r.err and r.err.count("\n") == 1


def test_integrate_refuses_an_assay_without_uncertainty():
    with pytest.raises(InputError, match="fit.uncertainty"):
        integrate_assay(Assay(0.99, ConstantSensitivity(0.95)))
