"""Dorfman's closed forms against Dorfman (1943) and Kim et al. (2007), and the optimiser."""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity, TableSensitivity
from bayespool.design import (dorfman_cohort_expected, dorfman_expected,
                              dorfman_tests_per_specimen, optimal_dorfman)


# Dorfman (1943), Annals of Mathematical Statistics 14(4), table of optimum group sizes and relative
# costs (from memory, as listed in references.md; they follow from 1/k + 1 - (1 - p)^k).
DORFMAN_1943 = [(0.01, 11, 0.196), (0.02, 8, 0.274), (0.05, 5, 0.426), (0.10, 4, 0.594),
                (0.15, 3, 0.719)]


@pytest.mark.parametrize("p,k,cost", DORFMAN_1943)
def test_dorfman_1943_best_pool_size_and_cost(p, k, cost):
    opt = optimal_dorfman(p)
    assert opt.best.pool_size == k
    assert round(opt.best.tests_per_sample, 3) == cost
    assert round(dorfman_tests_per_specimen(p, k), 3) == cost
    assert opt.best.sensitivity == pytest.approx(1.0) and opt.best.specificity == pytest.approx(1.0)


def test_dorfman_1943_pooling_stops_paying_near_031():
    # Dorfman (1943): above about p = 0.31 no group size saves tests (from memory, references.md).
    assert optimal_dorfman(0.30).saves
    low = optimal_dorfman(0.30).best
    assert low.pool_size == 3 and low.tests_per_sample < 1
    high = optimal_dorfman(0.32)
    assert not high.saves and high.best.pool_size == 1 and high.best.tests_per_sample == 1.0


def kim_2007(p, k, se, sp):
    """Kim, Hudgens, Dreyfuss, Westreich & Pilcher (2007), Biometrics 63(4), Dorfman with error
    (from memory, references.md): tests per person, pooled Se, pooled Sp."""
    q = 1 - p
    return (1 / k + se - (se + sp - 1) * q ** k, se ** 2,
            1 - (1 - sp) * (se - (se + sp - 1) * q ** (k - 1)))


@pytest.mark.parametrize("p,k,se,sp", [(0.01, 10, 0.95, 0.99), (0.05, 5, 0.9, 0.97),
                                       (0.1, 3, 0.8, 0.995), (0.2, 2, 0.99, 0.9),
                                       (0.03, 32, 1.0, 1.0)])
def test_kim_2007_closed_forms(p, k, se, sp):
    e = dorfman_expected(p, k, Assay(sp, ConstantSensitivity(se)))
    tests, sens, spec = kim_2007(p, k, se, sp)
    assert e.tests_per_sample == pytest.approx(tests, rel=1e-12)
    assert e.sensitivity == pytest.approx(sens, rel=1e-12)
    assert e.specificity == pytest.approx(spec, rel=1e-12)
    # predictive values from Bayes' rule on the pooled Se and Sp
    assert e.ppv == pytest.approx(p * sens / (p * sens + (1 - p) * (1 - spec)))


def test_no_error_reduces_to_dorfman_1943():
    for p, k in itertools.product([0.005, 0.05, 0.2], [2, 7, 20]):
        assert dorfman_expected(p, k).tests_per_sample == pytest.approx(
            dorfman_tests_per_specimen(p, k), rel=1e-12)


def test_dilution_closed_form_by_enumerating_pool_states():
    # With Se(k, d) falling with dilution, enumerate every status vector of one pool of k and add up
    # the probabilities of the two-stage rule directly (independent of the binomial sums).
    assay = Assay(0.97, DilutionSensitivity(se_max=0.96, r50=3.0, slope=1.5))
    p, k = 0.15, 5
    tests = tp = pos = fp = neg = 0.0
    for status in itertools.product([0, 1], repeat=k):
        x = np.array(status)
        prob = float(np.prod(np.where(x == 1, p, 1 - p)))
        d = int(x.sum())
        p_pool = assay.positive_probability(np.array([k]), np.array([d]))[0]
        se1 = assay.positive_probability(np.array([1]), np.array([1]))[0]
        tests += prob * (1 + k * p_pool)
        tp += prob * d * p_pool * se1
        pos += prob * d
        fp += prob * (k - d) * p_pool * (1 - assay.specificity)
        neg += prob * (k - d)
    e = dorfman_expected(p, k, assay)
    assert e.tests_per_sample == pytest.approx(tests / k, rel=1e-12)
    assert e.sensitivity == pytest.approx(tp / pos, rel=1e-12)
    assert e.specificity == pytest.approx(1 - fp / neg, rel=1e-12)


def test_cohort_expectation_weighs_the_last_pool():
    assay = Assay(0.99, ConstantSensitivity(0.9))
    e = dorfman_cohort_expected(0.05, 23, 5, assay)
    full, last = dorfman_expected(0.05, 5, assay), dorfman_expected(0.05, 3, assay)
    assert e.tests_per_sample == pytest.approx((20 * full.tests_per_sample
                                                + 3 * last.tests_per_sample) / 23)
    assert dorfman_cohort_expected(0.05, 20, 5, assay) == full


def test_optimum_with_error_and_limits():
    assay = Assay(0.99, ConstantSensitivity(0.95))
    opt = optimal_dorfman(0.02, assay)
    ks = np.arange(2, 40)
    costs = [kim_2007(0.02, k, 0.95, 0.99)[0] for k in ks]
    assert opt.best.pool_size == ks[int(np.argmin(costs))]
    capped = optimal_dorfman(0.01, max_pool_size=6)
    assert capped.best.pool_size == 6 and capped.at_limit
    table = Assay(0.99, TableSensitivity(((1, 1, 0.95), (4, 1, 0.9), (8, 1, 0.8))))
    assert set(optimal_dorfman(0.01, table).table["pool_size"]) == {1, 4, 8}
