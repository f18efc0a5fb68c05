"""Prevalence with the likelihood integrated over the fitted assay's uncertainty.

References: the integrated likelihood (Berger, Liseo & Wolpert 1999, Statistical Science 14, 1-28)
computed independently here by scipy's adaptive quadrature over the specificity's Beta posterior;
coverage on data simulated with the specificity drawn from that posterior (invented scenario of
scripts/prevalence_assay_uncertainty.py, which measured 0.955 integrated against 0.915 with the
assay taken as fitted over 200 sets).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.assay_spread import integrate as spread_of
from bayespool.errors import InputError
from bayespool.surveillance import estimate_prevalence
from bayespool.surveillance.integrated import IntegratedLikelihood
from bayespool.surveillance.likelihood import PoolCells

SPEC_BETA = (300.0, 4.0)    # Sp ~ Beta(300, 4): mean 0.987


def _assay(se=0.9):
    return Assay(0.987, ConstantSensitivity(se),
                 details={"uncertainty": {"specificity_beta": list(SPEC_BETA)}})


def _pools(k, results):
    return pd.DataFrame({"pool": [f"P{t}" for t in range(len(results))], "size": k,
                         "result": ["positive" if r else "negative" for r in results]})


def _direct(p, k, n_pos, n_neg, se):
    """log of the integral over Sp of Beta(Sp) * prod_pools P(readout | p, Sp), by quadrature."""
    q0 = (1 - p) ** k

    def f(sp):
        pos = se * (1 - q0) + (1 - sp) * q0
        return stats.beta.pdf(sp, *SPEC_BETA) * pos ** n_pos * (1 - pos) ** n_neg
    value, _ = integrate.quad(f, 0.9, 1.0, epsabs=0, epsrel=1e-10, limit=200, points=[0.987])
    return np.log(value)


def test_integrated_likelihood_against_quadrature():
    k, n_pos, n_neg = 10, 7, 53
    cells = PoolCells.from_pools(np.full(60, k), np.r_[np.ones(n_pos), np.zeros(n_neg)],
                                 np.r_[np.zeros(n_pos), np.ones(n_neg)])
    # the average over assays is a midpoint rule on the Beta quantiles: its error shrinks as
    # 1/draws (0.006 at the default 200 draws, 0.0006 at 2000, in the worst place, p = 0.002)
    for draws, tol in ((400, 4e-3), (2000, 1e-3)):
        lik = IntegratedLikelihood(cells, spread_of(_assay()), n_draws=draws)
        for p in (0.002, 0.008, 0.02):
            assert lik.loglik(p)[0] == pytest.approx(_direct(p, k, n_pos, n_neg, 0.9), abs=tol)
    h = 1e-7   # the score is the derivative of the integrated log-likelihood
    numeric = (lik.loglik(0.008 + h)[0] - lik.loglik(0.008 - h)[0]) / (2 * h)
    assert lik.score(0.008) == pytest.approx(numeric, rel=1e-5)


def test_uncertain_specificity_widens_the_interval_and_is_said():
    pools = _pools(10, [1] * 6 + [0] * 94)
    fixed = estimate_prevalence(pools, _assay(), interval="likelihood")
    spread = estimate_prevalence(pools, _assay(), assay_uncertainty=True)
    a, b = fixed.groups[0], spread.groups[0]
    assert spread.interval == "likelihood"      # the default under assay_uncertainty
    assert b.upper - b.lower > 1.02 * (a.upper - a.lower)
    assert np.isnan(b.bias_corrected)
    assert "integrated over the fit's uncertainty" in spread.assay
    assert any("integrate the likelihood" in n for n in spread.notes)


def test_coverage_when_the_true_specificity_follows_the_calibration():
    rng = np.random.default_rng(3)
    assay = _assay(0.95)
    hits, sets = 0, 60
    for _ in range(sets):
        sp = rng.beta(*SPEC_BETA)
        d = rng.binomial(10, 0.01, 100)
        positive = np.where(d > 0, rng.random(100) < 0.95, rng.random(100) < 1 - sp)
        g = estimate_prevalence(_pools(10, positive), assay, assay_uncertainty=True).groups[0]
        hits += g.lower <= 0.01 <= g.upper
    assert hits >= 52, hits      # nominal 57 of 60; 51 or fewer has probability below 0.001


@pytest.mark.parametrize("kwargs,needle", [
    ({"interval": "skew-score"}, "interval"), ({"interval": "exact"}, "interval")])
def test_score_intervals_are_refused(kwargs, needle):
    with pytest.raises(InputError, match=needle):
        estimate_prevalence(_pools(10, [1, 0, 0]), _assay(), assay_uncertainty=True, **kwargs)


def test_needs_a_fitted_assay():
    with pytest.raises(InputError, match="assay_uncertainty"):
        estimate_prevalence(_pools(10, [1, 0, 0]), None, assay_uncertainty=True)
    with pytest.raises(InputError, match="fit.uncertainty"):
        estimate_prevalence(_pools(10, [1, 0, 0]), Assay(0.99, ConstantSensitivity(0.9)),
                            assay_uncertainty=True)


def test_command_line(cli, tmp_path):
    """--assay-uncertainty end to end: calibrate writes the uncertainty, prevalence uses it."""
    assay = tmp_path / "assay.toml"
    r = cli("calibrate", "--validation", "datasets/demo/invented_validation.csv", "--model",
            "constant", "--out", assay, "--no-plot")
    assert r.code == 0, r.err
    pools = "datasets/surveillance/pools.csv"
    r = cli("prevalence", "--pools", pools, "--assay", assay, "--assay-uncertainty", "--json")
    assert r.code == 0, r.err
    import json
    doc = json.loads(r.out)
    assert doc["interval"] == "likelihood" and "integrated" in doc["assay"]
    assert doc["groups"][0]["bias_corrected"] is None
    r = cli("prevalence", "--pools", pools, "--assay", assay, "--assay-uncertainty",
            "--interval", "score")
    assert r.code == 2 and r.err.count("\n") == 1 and "--interval" in r.err
    r = cli("prevalence", "--pools", pools, "--assay-uncertainty")
    assert r.code == 2 and "--assay-uncertainty" in r.err
