"""Prevalence from pooled readouts against closed forms and reference libraries.

Sources: Thompson (1962) MLE for equal pool sizes; Burrows (1987) bias correction (from memory, as
quoted in the shared references); Hepworth (1996) exact interval = Clopper-Pearson of the
positive-pool fraction mapped through the same transform (statsmodels' proportion_confint,
method="beta"); pools of one reduce to the binomial: Wilson's score interval (statsmodels,
method="wilson"), the conjugate Beta posterior (scipy.stats.beta); Tu, Litvak & Pagano (1995)
closed form with a constant Se and Sp (from memory); Walter, Hildreth & Beaty (1980) unequal sizes
against a direct numerical maximisation; Farrington (1992): the likelihood-ratio test of equal
prevalences equals the deviance difference of statsmodels binomial GLMs with cloglog link and
offset log k.
"""
import numpy as np
import pandas as pd
import pytest
from scipy.optimize import brentq, minimize_scalar
from scipy.stats import beta, binom, chi2, norm

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.errors import ImpossibleEvidenceError, InputError
from bayespool.surveillance import estimate_prevalence
from bayespool.surveillance.likelihood import PoolCells, PooledLikelihood

sm = pytest.importorskip("statsmodels.api")
from statsmodels.stats.proportion import proportion_confint  # noqa: E402


def equal_pools(n, x, k, group=None):
    rows = {"pool": [f"P{i}" for i in range(n)], "size": [k] * n,
            "result": ["positive"] * x + ["negative"] * (n - x)}
    if group is not None:
        rows["site"] = [group] * n
    return pd.DataFrame(rows)


CASES = [(40, 7, 10), (50, 3, 25), (30, 1, 50), (20, 12, 5), (100, 0, 10), (15, 15, 8),
         (60, 59, 3)]


@pytest.mark.parametrize("n,x,k", CASES)
def test_mle_thompson_1962(n, x, k):
    res = estimate_prevalence(equal_pools(n, x, k), interval="likelihood")
    g = res.groups[0]
    closed = 1 - (1 - x / n) ** (1 / k)   # Thompson (1962)
    assert g.mle == pytest.approx(closed, rel=1e-10, abs=1e-14)
    assert g.minimum_infection_rate == pytest.approx(x / (n * k))


@pytest.mark.parametrize("n,x,k", CASES)
def test_bias_correction_burrows_1987(n, x, k):
    a = (k - 1) / (2 * k)
    burrows = 1 - ((n - x + a) / (n + a)) ** (1 / k)   # Burrows (1987), from memory
    g = estimate_prevalence(equal_pools(n, x, k), interval="likelihood").groups[0]
    assert g.bias_corrected == pytest.approx(burrows, rel=1e-9, abs=1e-14)


@pytest.mark.parametrize("n,x,k", CASES)
@pytest.mark.parametrize("level", [0.95, 0.9])
def test_exact_interval_hepworth_1996(n, x, k, level):
    g = estimate_prevalence(equal_pools(n, x, k), interval="exact", level=level).groups[0]
    lo, up = proportion_confint(x, n, alpha=1 - level, method="beta")   # Clopper-Pearson
    assert g.lower == pytest.approx(1 - (1 - lo) ** (1 / k), rel=1e-9, abs=1e-14)
    assert g.upper == pytest.approx(1 - (1 - up) ** (1 / k), rel=1e-9, abs=1e-14)


@pytest.mark.parametrize("n,x", [(50, 7), (200, 3), (30, 29), (80, 40)])
def test_score_interval_pools_of_one_is_wilson(n, x):
    g = estimate_prevalence(equal_pools(n, x, 1), interval="score").groups[0]
    lo, up = proportion_confint(x, n, alpha=0.05, method="wilson")   # statsmodels
    assert (g.lower, g.upper) == pytest.approx((lo, up), rel=1e-8)


@pytest.mark.parametrize("n,x", [(50, 0), (50, 7), (20, 20), (400, 2)])
def test_bayes_pools_of_one_is_the_conjugate_beta(n, x):
    g = estimate_prevalence(equal_pools(n, x, 1), interval="bayes", prior=(0.5, 2.0)).groups[0]
    ref = beta.ppf([0.025, 0.975], 0.5 + x, 2.0 + n - x)   # scipy: Beta(a + x, b + n - x)
    assert (g.lower, g.upper) == pytest.approx(tuple(ref), rel=1e-7)


@pytest.mark.parametrize("n,x", [(50, 7), (200, 3), (80, 40)])
def test_skew_score_pools_of_one_binomial_closed_form(n, x):
    """Binomial score T = (x - n p)/sqrt(n p q), skewness (1 - 2p)/sqrt(n p q) (the binomial's
    third cumulant), limits where T - skew (z^2 - 1)/6 = +-z (Bartlett 1953, from memory)."""
    z = norm.ppf(0.975)

    def centred(p):
        s = np.sqrt(n * p * (1 - p))
        return (x - n * p) / s - (1 - 2 * p) / s * (z * z - 1) / 6

    lo = brentq(lambda p: centred(p) - z, 1e-9, x / n)
    up = brentq(lambda p: centred(p) + z, x / n, 1 - 1e-9)
    g = estimate_prevalence(equal_pools(n, x, 1)).groups[0]
    assert (g.lower, g.upper) == pytest.approx((lo, up), rel=1e-8)


@pytest.mark.parametrize("n,x", [(50, 7), (80, 40)])
def test_likelihood_interval_pools_of_one(n, x):
    ll = lambda p: binom.logpmf(x, n, p)
    top = ll(x / n)
    cut = chi2.ppf(0.95, 1)
    lo = brentq(lambda p: 2 * (top - ll(p)) - cut, 1e-9, x / n)
    up = brentq(lambda p: 2 * (top - ll(p)) - cut, x / n, 1 - 1e-9)
    g = estimate_prevalence(equal_pools(n, x, 1), interval="likelihood").groups[0]
    assert (g.lower, g.upper) == pytest.approx((lo, up), rel=1e-8)


@pytest.mark.parametrize("n,x,k,se,sp", [(60, 12, 10, 0.9, 0.98), (100, 5, 20, 0.95, 0.995)])
def test_imperfect_assay_tu_litvak_pagano_1995(n, x, k, se, sp):
    assay = Assay(sp, ConstantSensitivity(se))
    g = estimate_prevalence(equal_pools(n, x, k), assay, interval="likelihood").groups[0]
    closed = 1 - ((se - x / n) / (se + sp - 1)) ** (1 / k)   # Tu et al. (1995), from memory
    assert g.mle == pytest.approx(closed, rel=1e-9)


def test_imperfect_assay_below_false_positive_rate_is_clipped_with_a_note():
    assay = Assay(0.95, ConstantSensitivity(0.9))
    res = estimate_prevalence(equal_pools(100, 3, 10), assay)   # 3% < 1 - Sp = 5%
    g = res.groups[0]
    assert g.mle == 0.0 and g.lower == 0.0 and g.upper > 0
    assert any("clipped at 0" in n for n in g.notes)


def test_unequal_sizes_walter_1980_against_direct_maximisation():
    sizes = np.array([5, 10, 10, 25, 25, 25, 50, 50, 50, 50, 100, 100])
    pos = np.array([0, 1, 0, 0, 1, 0, 1, 0, 1, 1, 1, 0])
    frame = pd.DataFrame({"pool": [f"P{i}" for i in range(len(sizes))], "size": sizes,
                          "result": np.where(pos == 1, "positive", "negative")})

    def negll(p):
        q = (1 - p) ** sizes
        return -np.sum(pos * np.log1p(-q) + (1 - pos) * np.log(q))

    ref = minimize_scalar(negll, bounds=(1e-9, 0.5), method="bounded",
                          options={"xatol": 1e-14}).x
    g = estimate_prevalence(frame).groups[0]
    assert g.mle == pytest.approx(ref, rel=1e-7)


def test_dilution_likelihood_against_direct_sum_over_positives():
    """P(pool of k positive) = sum_d Binomial(d; k, p) P(positive | k, d) (Tu et al. 1995),
    evaluated here directly with scipy.stats.binom."""
    assay = Assay(0.99, DilutionSensitivity(0.97, 20.0, 1.5))
    sizes = np.array([5, 10, 30, 30])
    npos, nneg = np.array([1, 0, 2, 1]), np.array([0, 1, 1, 2])
    lik = PooledLikelihood(PoolCells.from_pools(sizes, npos, nneg), assay)
    for p in (0.001, 0.02, 0.2):
        ref = 0.0
        for k, a, b in zip(sizes, npos, nneg):
            d = np.arange(k + 1)
            theta = np.where(d == 0, 0.01, 0.97 / (1 + (k / np.maximum(d, 1) / 20.0) ** 1.5))
            ref += np.log(np.sum(binom.pmf(d, k, p) * theta ** a * (1 - theta) ** b))
        assert lik.loglik(p)[0] == pytest.approx(ref, rel=1e-12)
        # the score is the derivative of the log-likelihood (central difference)
        h = 1e-6 * p
        num = (lik.loglik(p + h)[0] - lik.loglik(p - h)[0]) / (2 * h)
        assert lik.moments(p).score == pytest.approx(num, rel=1e-6)


def test_difference_likelihood_ratio_equals_glm_deviance_farrington_1992():
    """Equal prevalences in two sites: the likelihood-ratio statistic equals the deviance
    difference of binomial GLMs with cloglog link and offset log k (statsmodels)."""
    a = pd.DataFrame({"pool": [f"A{i}" for i in range(30)], "size": [10] * 15 + [20] * 15,
                      "result": ["positive"] * 6 + ["negative"] * 9 + ["positive"] * 7
                      + ["negative"] * 8, "site": "north"})
    b = pd.DataFrame({"pool": [f"B{i}" for i in range(25)], "size": [10] * 25,
                      "result": ["positive"] * 2 + ["negative"] * 23, "site": "south"})
    frame = pd.concat([a, b], ignore_index=True)
    res = estimate_prevalence(frame, by="site", interval="likelihood")
    d = res.difference
    y = (frame["result"] == "positive").astype(float).to_numpy()
    offset = np.log(frame["size"].to_numpy(dtype=float))
    fam = sm.families.Binomial(link=sm.families.links.CLogLog())
    x1 = sm.add_constant((frame["site"] == "south").astype(float).to_numpy())
    full = sm.GLM(y, x1, family=fam, offset=offset).fit(tol=1e-12)
    null = sm.GLM(y, np.ones((len(y), 1)), family=fam, offset=offset).fit(tol=1e-12)
    p_ref = chi2.sf(null.deviance - full.deviance, 1)
    assert d.p_value == pytest.approx(p_ref, rel=1e-6)
    ga, gb = res.groups
    assert d.estimate == pytest.approx(ga.mle - gb.mle, rel=1e-12)
    assert d.lower < d.estimate < d.upper


def test_replicates_share_the_pool_and_contradict_a_perfect_assay():
    frame = pd.DataFrame({"pool": ["P1", "P1", "P2"], "size": [10, 10, 10],
                          "result": ["positive", "negative", "negative"]})
    with pytest.raises(ImpossibleEvidenceError):
        estimate_prevalence(frame)
    assay = Assay(0.99, ConstantSensitivity(0.9))
    g = estimate_prevalence(frame, assay, interval="likelihood").groups[0]
    assert g.pools == 2 and g.positive_pools == 1 and g.specimens == 20


def test_per_scales_every_estimate_and_the_result_protocol():
    frame = pd.concat([equal_pools(40, 7, 10, "a"), equal_pools(40, 2, 10, "b")])
    frame["pool"] = [f"P{i}" for i in range(len(frame))]
    res = estimate_prevalence(frame, by=["site"], per=1000)
    one = estimate_prevalence(equal_pools(40, 7, 10)).groups[0]
    frame = res.to_frame()
    assert list(frame.index) == ["a", "b"] and frame.index.name == "site"
    assert frame.loc["a", "mle"] == pytest.approx(1000 * one.mle)
    assert frame.loc["a", "upper"] == pytest.approx(1000 * one.upper)
    s = res.summary()
    assert set(s["groups"][0]) >= {"group", "pools", "positive_pools", "specimens", "mle",
                                   "bias_corrected", "lower", "upper", "interval", "level", "per"}
    assert s["groups"][0]["group"] == {"site": "a"}
    assert "\n" not in repr(res) and "per 1000" in str(res)
    assert s["difference"]["a"] == "a" and s["difference"]["per"] == 1000


@pytest.mark.parametrize("kwargs,needle", [
    ({"level": 1.5}, "level"), ({"per": 0}, "per"), ({"interval": "wald"}, "interval"),
    ({"by": "region"}, "region"), ({"interval": "exact", "by": "site"}, "one size")])
def test_bad_options_name_the_parameter(kwargs, needle):
    frame = pd.concat([equal_pools(5, 1, 10, "a"), equal_pools(5, 1, 20, "a")])
    frame["pool"] = [f"P{i}" for i in range(len(frame))]
    with pytest.raises(InputError, match=needle):
        estimate_prevalence(frame, **kwargs)


def test_coverage_imperfect_assay_small():
    """Data simulated at known p, Se, Sp (dilution): the default interval covers p near the
    nominal 95% (a quick version of scripts/prevalence_coverage.py)."""
    rng = np.random.default_rng(20261205)
    assay = Assay(0.99, DilutionSensitivity(0.97, 30.0, 2.0))
    p, sizes = 0.01, np.repeat([10, 25, 50], 20)
    hits = 0
    sets = 120
    for _ in range(sets):
        d = rng.binomial(sizes, p)
        pos = assay.draw_readouts(sizes, d, rng)
        frame = pd.DataFrame({"pool": np.arange(len(sizes)).astype(str), "size": sizes,
                              "result": np.where(pos, "positive", "negative")})
        g = estimate_prevalence(frame, assay).groups[0]
        hits += g.lower <= p <= g.upper
    assert 0.88 <= hits / sets <= 0.995, hits / sets
