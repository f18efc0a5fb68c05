"""Calibration from validation runs checked against outside references.

- statsmodels' binomial GLM (logit link) on log(k/d) is the reference fit of the dilution family
  with se_max fixed at 1: logit Se = slope * log(r50) - slope * log(k/d) (references.md).
- statsmodels' proportion_confint(method="beta") is the Clopper-Pearson interval (Clopper &
  Pearson 1934).
- A profile-likelihood interval holds the values whose profile deviance is below the chi-square(1)
  quantile (Wilks 1938; Venzon & Moolgavkar 1988); the end points are checked by an independent
  brute-force profile with scipy.optimize (Nelder-Mead from several starts) and, for one binomial
  proportion, by scipy's brentq on the closed-form deviance.
"""
import warnings

import numpy as np
import pytest
from scipy import optimize
from scipy.special import logit, xlogy
from scipy.stats import chi2

from bayespool.assay import Assay, DilutionSensitivity
from bayespool.calibration import calibrate_validation
from bayespool.calibration.fit import fit_sensitivity
from bayespool.calibration.validation import ValidationData

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    import statsmodels.api as sm
    from statsmodels.stats.proportion import proportion_confint

Q95 = chi2.ppf(0.95, 1)


def simulate(rng, assay, sizes, positives, reps, negatives=(8, 60)):
    """Readouts of ``reps`` pools per (size, positives) cell plus ``negatives`` = (size, count)
    pools without a positive member."""
    k = np.repeat(sizes, reps)
    d = np.repeat(positives, reps)
    k = np.concatenate([k, np.full(negatives[1], negatives[0])])
    d = np.concatenate([d, np.zeros(negatives[1], dtype=int)])
    return k, d, assay.draw_readouts(k, d, rng)


DESIGNS = [
    # (se_max for simulation, r50, slope, sizes, positives, reps)
    (1.0, 20.0, 1.3, [1, 2, 4, 8, 16, 32, 32, 16], [1, 1, 1, 1, 1, 1, 2, 2], 25),
    (1.0, 60.0, 0.8, [1, 5, 10, 20, 40, 80], [1, 1, 1, 1, 1, 1], 40),
    (0.97, 12.0, 2.2, [1, 3, 6, 12, 24, 24, 48], [1, 1, 1, 1, 1, 3, 2], 18),
]


@pytest.mark.parametrize("design", range(len(DESIGNS)))
@pytest.mark.parametrize("seed", [1, 2])
def test_dilution_with_se_max_1_equals_statsmodels_binomial_glm(design, seed):
    # reference: statsmodels GLM, Binomial family (logit link) on log(k/d) (references.md)
    se_max, r50, slope, sizes, positives, reps = DESIGNS[design]
    rng = np.random.default_rng(100 * design + seed)
    k, d, y = simulate(rng, Assay(0.99, DilutionSensitivity(se_max, r50, slope)), sizes,
                       positives, reps)
    res = calibrate_validation(ValidationData.from_arrays(k, d, y), "dilution",
                               fixed={"se_max": 1.0})
    sel = d > 0
    x = sm.add_constant(np.log(k[sel] / d[sel]))
    glm = sm.GLM(y[sel].astype(float), x, family=sm.families.Binomial()).fit(tol=1e-13)
    intercept, coef = glm.params
    ref_slope = -coef
    ref_r50 = np.exp(intercept / ref_slope)
    assert res.estimate("slope") == pytest.approx(ref_slope, rel=1e-6, abs=1e-6)
    assert res.estimate("r50") == pytest.approx(ref_r50, rel=1e-6)
    # the GLM's own parameters, rebuilt from ours
    assert res.estimate("slope") * np.log(res.estimate("r50")) == pytest.approx(intercept, abs=1e-6)
    # the sensitivity part of the log-likelihood is the GLM's log-likelihood
    n0, neg0 = int((~sel).sum()), int((y[~sel] == 0).sum())
    sp = neg0 / n0
    ll_sp = xlogy(neg0, sp) + xlogy(n0 - neg0, 1 - sp)
    assert res.log_likelihood - ll_sp == pytest.approx(glm.llf, abs=1e-7)
    # AIC: statsmodels counts the two GLM parameters; ours adds the specificity
    assert res.aic == pytest.approx(glm.aic + 2 - 2 * ll_sp, abs=1e-6)
    # Wald covariance: ours is on (log r50, log slope); map statsmodels' (intercept, coef) to it
    # by the delta method: intercept = b c, coef = -b with c = log r50, b = exp(beta)
    b, c = res.estimate("slope"), np.log(res.estimate("r50"))
    jac = np.array([[b, b * c], [0.0, -b]])  # d(intercept, coef) / d(c, beta)
    ours = jac @ res.covariance.to_numpy() @ jac.T
    assert np.allclose(ours, glm.cov_params(), rtol=1e-5, atol=1e-9)


def test_goodness_of_fit_equals_statsmodels_grouped_glm():
    # reference: statsmodels GLM on grouped binomial counts: deviance and Pearson chi-square;
    # the single cell without positives is saturated by the specificity, so it adds nothing
    rng = np.random.default_rng(7)
    se_max, r50, slope, sizes, positives, reps = DESIGNS[0]
    k, d, y = simulate(rng, Assay(0.98, DilutionSensitivity(1.0, r50, slope)), sizes, positives,
                       reps)
    res = calibrate_validation(ValidationData.from_arrays(k, d, y), "dilution",
                               fixed={"se_max": 1.0})
    cells = res.cells[res.cells["positives"] > 0]
    endog = np.column_stack([cells["positive_readouts"], cells["readouts"] -
                             cells["positive_readouts"]]).astype(float)
    exog = sm.add_constant(np.log(cells["dilution"].to_numpy()))
    glm = sm.GLM(endog, exog, family=sm.families.Binomial()).fit(tol=1e-13)
    g = res.goodness
    assert g["deviance"] == pytest.approx(glm.deviance, abs=1e-6)
    assert g["pearson"] == pytest.approx(glm.pearson_chi2, abs=1e-6)
    assert g["df"] == glm.df_resid
    assert g["deviance_p_value"] == pytest.approx(chi2.sf(glm.deviance, glm.df_resid), abs=1e-7)
    assert np.allclose(cells["fitted_rate"], glm.fittedvalues, atol=1e-7)


@pytest.mark.parametrize("negatives,false_pos", [(200, 3), (60, 0), (45, 45), (1, 0), (500, 17)])
def test_specificity_interval_equals_statsmodels_clopper_pearson(negatives, false_pos):
    # reference: statsmodels proportion_confint(method="beta") (Clopper & Pearson 1934)
    k = np.concatenate([np.full(negatives, 8), np.full(30, 4)])
    d = np.concatenate([np.zeros(negatives, int), np.ones(30, int)])
    y = np.concatenate([np.arange(negatives) < false_pos, np.arange(30) < 27])
    res = calibrate_validation(ValidationData.from_arrays(k, d, y), "constant")
    lo, hi = proportion_confint(negatives - false_pos, negatives, alpha=0.05, method="beta")
    assert res.interval("specificity") == pytest.approx((lo, hi), abs=1e-12)
    assert res.estimate("specificity") == pytest.approx((negatives - false_pos) / negatives)
    # and every cell's observed rate carries the same interval
    for row in res.cells.itertuples():
        lo, hi = proportion_confint(row.positive_readouts, row.readouts, alpha=0.05,
                                    method="beta")
        assert (row.observed_lower, row.observed_upper) == pytest.approx((lo, hi), abs=1e-12)


def test_constant_sensitivity_interval_is_the_binomial_likelihood_ratio_interval():
    # reference: the likelihood-ratio interval of one binomial proportion (Wilks 1938), solved
    # here independently with scipy's brentq on the closed-form deviance
    k = np.concatenate([np.full(80, 8), np.repeat([4, 8, 16], 30)])
    d = np.concatenate([np.zeros(80, int), np.ones(90, int)])
    y = np.concatenate([np.zeros(80, bool), np.arange(90) % 10 != 0])  # 81 of 90 detected
    res = calibrate_validation(ValidationData.from_arrays(k, d, y), "constant")
    x, n = 81, 90
    phat = x / n

    def dev(p):
        return 2 * (xlogy(x, phat) + xlogy(n - x, 1 - phat) - xlogy(x, p) - xlogy(n - x, 1 - p))
    lo = optimize.brentq(lambda p: dev(p) - Q95, 1e-9, phat)
    hi = optimize.brentq(lambda p: dev(p) - Q95, phat, 1 - 1e-12)
    assert res.estimate("sensitivity") == pytest.approx(phat, abs=1e-10)
    assert res.interval("sensitivity") == pytest.approx((lo, hi), abs=1e-7)


def brute_profile(objective, j, value, starts):
    """Profile of parameter j at ``value`` by scipy Nelder-Mead over the others."""
    best = np.inf
    for s in starts:
        others = np.delete(np.asarray(s, float), j)

        def f(v):
            u = np.insert(v, j, value)
            return objective(u)[0]
        r = optimize.minimize(f, others, method="Nelder-Mead",
                              options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000})
        best = min(best, r.fun)
    return best


@pytest.mark.parametrize("seed", [3, 4])
def test_dilution_profile_end_points_match_a_brute_force_profile(seed):
    # reference: the profile deviance at each interval end is the chi-square(1) 0.95 quantile
    # (Venzon & Moolgavkar 1988), the profile computed independently by scipy's Nelder-Mead
    rng = np.random.default_rng(seed)
    truth = Assay(0.99, DilutionSensitivity(0.9, 25.0, 1.4))
    k, d, y = simulate(rng, truth, [1, 4, 8, 16, 32, 64], [1] * 6, 30)
    data = ValidationData.from_arrays(k, d, y)
    res = calibrate_validation(data, "dilution")
    fit = fit_sensitivity(data.sensitivity_cells(), "dilution")
    fmin = -fit.loglik
    starts = [fit.optimum.u] + [np.array(s) for s in fit.starts]
    for j, name in enumerate(["se_max", "r50", "slope"]):
        for end in res.interval(name):
            if end in (0.0, 1.0) or not np.isfinite(end):
                continue  # open end: the deviance never reaches the threshold
            u = logit(end) if name == "se_max" else np.log(end)
            dev = 2 * (brute_profile(fit.objective, j, u, starts) - fmin)
            assert dev == pytest.approx(Q95, abs=2e-4), (name, end, dev)
        lo, hi = res.interval(name)
        est = res.estimate(name)
        assert lo <= est <= hi
