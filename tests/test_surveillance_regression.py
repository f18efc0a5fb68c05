"""Group testing regression against reference fits.

Sources: Farrington (1992): homogeneous pools under a perfect test are a binomial GLM with the
complementary log-log link and offset log k on pool-level data (statsmodels GLM as the reference,
coefficients to 1e-6; standard errors against its observed-information fit, method="newton");
pools of one are ordinary logistic regression (statsmodels Logit, to 1e-6); the log-likelihood of
the readouts equals the GLM's. Recovery and coverage on simulated Dorfman data with an imperfect
assay (simulated truth); fitted priors improve decoding over one prevalence (Brier score).
"""
import dataclasses

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.errors import InputError
from bayespool.run import Run
from bayespool.surveillance.regression import fit_regression

sm = pytest.importorskip("statsmodels.api")

PERFECT = Assay(1.0, ConstantSensitivity(1.0))
SITE = {"a": 0.0, "b": 0.6, "c": -0.4}


def homogeneous(rng, n_pools, sizes, base=-4.0):
    """Pools whose members share age and site (Farrington's setting), read by a perfect test."""
    lay, rd, smp, pools = [], [], [], []
    for t in range(n_pools):
        k = int(rng.choice(sizes))
        age = float(np.round(rng.normal(40, 10), 1))
        site = str(rng.choice(list(SITE)))
        p = 1 - np.exp(-np.exp(base + 0.03 * (age - 40) + SITE[site]))
        x = rng.random(k) < p
        for j in range(k):
            lay.append((f"P{t}", f"S{t}_{j}"))
            smp.append((f"S{t}_{j}", age, site))
        rd.append((f"P{t}", "positive" if x.any() else "negative"))
        pools.append((k, age, site, float(x.any())))
    run = Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                          pd.DataFrame(rd, columns=["pool", "result"]),
                          pd.DataFrame(smp, columns=["sample", "age", "site"]))
    return run, pd.DataFrame(pools, columns=["k", "age", "site", "y"])


def pool_matrix(pools):
    return np.column_stack([np.ones(len(pools)), pools["age"], (pools["site"] == "b"),
                            (pools["site"] == "c")]).astype(float)


def test_homogeneous_pools_equal_cloglog_glm_with_offset_farrington_1992():
    run, pools = homogeneous(np.random.default_rng(3), 150, [1, 3, 5, 10])
    fit = fit_regression(run, PERFECT, formula="age + C(site)", link="cloglog")
    assert fit.terms == ["Intercept", "age", "C(site)[T.b]", "C(site)[T.c]"]
    glm = sm.GLM(pools["y"].to_numpy(), pool_matrix(pools),
                 family=sm.families.Binomial(link=sm.families.links.CLogLog()),
                 offset=np.log(pools["k"].to_numpy(dtype=float)))
    ref = glm.fit(tol=1e-13)
    np.testing.assert_allclose(fit.estimate, ref.params, rtol=0, atol=1e-6)
    observed = glm.fit(method="newton", tol=1e-13)   # observed-information standard errors
    np.testing.assert_allclose(fit.std_error, observed.bse, rtol=1e-4)
    assert fit.log_likelihood == pytest.approx(ref.llf, abs=1e-6)
    assert fit.method == "exact" and fit.converged


def test_pools_of_one_equal_logistic_regression():
    run, pools = homogeneous(np.random.default_rng(11), 400, [1], base=-1.5)
    fit = fit_regression(run, PERFECT, formula="~ age + C(site)")
    ref = sm.Logit(pools["y"].to_numpy(), pool_matrix(pools)).fit(disp=0, method="newton",
                                                                   tol=1e-13)
    np.testing.assert_allclose(fit.estimate, ref.params, rtol=0, atol=1e-6)
    np.testing.assert_allclose(fit.std_error, ref.bse, rtol=1e-5)
    c = fit.coefficients()
    assert list(c.columns) == ["term", "estimate", "std_error", "lower", "upper"]
    np.testing.assert_allclose(c[["lower", "upper"]].to_numpy(), ref.conf_int(), rtol=1e-5)


def dorfman_run(rng, n, k, beta, assay):
    """Invented cohort: age ~ N(40, 12), exposure 0/1; Dorfman pools of k, every member of a
    positive pool retested alone (pools of one), all read by ``assay``."""
    age = rng.normal(40, 12, n)
    expo = (rng.random(n) < 0.3).astype(float)
    eta = beta[0] + beta[1] * (age - 40) / 10 + beta[2] * expo
    x = rng.random(n) < 1 / (1 + np.exp(-eta))
    ids = np.array([f"S{i}" for i in range(n)])
    lay, rd = [], []
    for t in range(0, n, k):
        members = np.arange(t, min(t + k, n))
        for i in members:
            lay.append((f"P{t}", ids[i]))
        pos = assay.draw_readouts(np.array([len(members)]), np.array([x[members].sum()]), rng)[0]
        rd.append((f"P{t}", "positive" if pos else "negative"))
        if pos:
            for i in members:
                lay.append((f"R{i}", ids[i]))
                r = assay.draw_readouts(np.array([1]), np.array([int(x[i])]), rng)[0]
                rd.append((f"R{i}", "positive" if r else "negative"))
    samples = pd.DataFrame({"sample": ids, "age10": (age - 40) / 10, "exposed": expo})
    run = Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                          pd.DataFrame(rd, columns=["pool", "result"]), samples)
    return run, x, 1 / (1 + np.exp(-eta))


def test_dorfman_imperfect_assay_recovery_and_coverage_small():
    """Simulated truth beta = (-3, 0.5, 1.2): every coefficient's 95% interval covers it in most
    of 20 simulated Dorfman runs (a quick version of scripts/regression_coverage.py)."""
    assay = Assay(0.99, ConstantSensitivity(0.95))
    beta = np.array([-3.0, 0.5, 1.2])
    rng = np.random.default_rng(7)
    covered, estimates = np.zeros(3), []
    for _ in range(20):
        run, _, _ = dorfman_run(rng, 1500, 5, beta, assay)
        fit = fit_regression(run, assay, formula="age10 + exposed")
        c = fit.coefficients()
        covered += (c["lower"].to_numpy() <= beta) & (beta <= c["upper"].to_numpy())
        estimates.append(fit.estimate)
    assert np.all(covered >= 16), covered   # nominal 19 of 20
    assert np.all(np.abs(np.mean(estimates, axis=0) - beta) < 0.15), np.mean(estimates, axis=0)


def test_fitted_priors_improve_decoding_brier():
    from bayespool.decoders import decode
    assay = Assay(0.99, ConstantSensitivity(0.95))
    run, x, _ = dorfman_run(np.random.default_rng(5), 2000, 8, np.array([-3.5, 0.8, 2.0]), assay)
    fit = fit_regression(run, assay, formula="age10 + exposed")
    flat = decode(dataclasses.replace(run, prior=np.full(run.n_samples, x.mean())), assay)
    informed = decode(dataclasses.replace(run, prior=fit.risk), assay)
    brier = lambda p: float(np.mean((p - x) ** 2))
    assert brier(informed.probability) < brier(flat.probability)
    priors = fit.priors_frame()
    assert list(priors["sample"]) == list(run.sample_ids) and "prior" in priors
    assert ((priors["prior"] > 0) & (priors["prior"] < 1)).all()


@pytest.mark.parametrize("kwargs,needle", [
    ({"formula": "age + C(region)"}, "region"), ({"formula": ""}, "formula"),
    ({"formula": "age", "link": "probit"}, "link"), ({"formula": "age", "level": 2}, "level"),
    ({"formula": "age", "method": "exact-ish"}, "method")])
def test_bad_arguments_name_the_parameter(kwargs, needle):
    run, _ = homogeneous(np.random.default_rng(1), 20, [2])
    with pytest.raises(InputError, match=needle):
        fit_regression(run, PERFECT, **kwargs)


def test_result_protocol():
    run, _ = homogeneous(np.random.default_rng(3), 60, [1, 5])
    fit = fit_regression(run, PERFECT, formula="age", link="cloglog")
    assert list(fit.to_frame().index) == ["Intercept", "age"]
    s = fit.summary()
    assert s["coefficients"][0]["term"] == "Intercept"
    assert set(s["coefficients"][0]) == {"term", "estimate", "std_error", "lower", "upper"}
    assert "\n" not in repr(fit) and "Intercept" in str(fit)


def array_run(rng, grids, side, beta, assay):
    """Invented square arrays side x side: every row and column pooled and read once by
    ``assay``; covariate age10 ~ N(0, 1.2)."""
    lay, rd, smp = [], [], []
    for g in range(grids):
        age = rng.normal(0, 1.2, (side, side))
        x = rng.random((side, side)) < 1 / (1 + np.exp(-(beta[0] + beta[1] * age)))
        for i in range(side):
            for j in range(side):
                s = f"G{g}_{i}_{j}"
                smp.append((s, age[i, j]))
                lay += [(f"G{g}R{i}", s), (f"G{g}C{j}", s)]
        for name, d in [(f"G{g}R{i}", x[i].sum()) for i in range(side)] + \
                       [(f"G{g}C{j}", x[:, j].sum()) for j in range(side)]:
            pos = assay.draw_readouts(np.array([side]), np.array([d]), rng)[0]
            rd.append((name, "positive" if pos else "negative"))
    return Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                           pd.DataFrame(rd, columns=["pool", "result"]),
                           pd.DataFrame(smp, columns=["sample", "age10"]))


def test_array_imperfect_assay_recovery_and_coverage_small():
    """Simulated truth beta = (-2, 0.8) on 3 x 3 arrays (rows and columns pooled, no individual
    tests) read by an imperfect assay: every 95% interval covers the truth in at least 16 of 20
    sets (under nominal coverage, 15 or fewer happens with probability 0.016) and the mean estimate
    is near the truth (a quick version of scripts/regression_coverage.py, whose 100 sets of 4 x 4
    arrays gave coverage 0.99 and 0.97)."""
    assay = Assay(0.99, ConstantSensitivity(0.95))
    beta = np.array([-2.0, 0.8])
    rng = np.random.default_rng(12)
    covered, estimates = np.zeros(2), []
    for _ in range(20):
        fit = fit_regression(array_run(rng, 60, 3, beta, assay), assay, formula="age10")
        c = fit.coefficients()
        covered += (c["lower"].to_numpy() <= beta) & (beta <= c["upper"].to_numpy())
        estimates.append(fit.estimate)
    assert np.all(covered >= 16), covered
    assert np.all(np.abs(np.mean(estimates, axis=0) - beta) < 0.15), np.mean(estimates, axis=0)


def test_gibbs_path_agrees_with_exact_em_on_array_data():
    """Monte Carlo EM (Gibbs E-step, Louis information) against exact EM on 3 x 3 arrays, which
    enumeration covers: estimates within 0.1 standard errors, standard errors within 10%."""
    assay = Assay(0.98, ConstantSensitivity(0.9))
    run = array_run(np.random.default_rng(4), 45, 3, (-2.0, 0.8), assay)
    exact = fit_regression(run, assay, formula="age10")
    gibbs = fit_regression(run, assay, formula="age10", method="gibbs", seed=3)
    assert exact.method == "exact" and gibbs.method == "gibbs"
    assert np.all(np.abs(gibbs.estimate - exact.estimate) < 0.1 * exact.std_error), \
        (gibbs.estimate, exact.estimate)
    np.testing.assert_allclose(gibbs.std_error, exact.std_error, rtol=0.1)
    assert gibbs.summary()["monte_carlo"]["posterior_draws"] > 100


def test_auto_takes_the_gibbs_path_for_large_linked_groups():
    from bayespool.surveillance.regression.estep import ExactEStep
    assay = Assay(0.98, ConstantSensitivity(0.9))
    run = array_run(np.random.default_rng(4), 2, 6, (-2.0, 0.8), assay)
    assert not ExactEStep(run, assay).feasible()   # 36 linked specimens per array
    with pytest.raises(InputError, match="above the limit"):
        fit_regression(run, assay, formula="age10", method="exact")
