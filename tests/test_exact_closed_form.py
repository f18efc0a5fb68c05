"""Hand-checkable posteriors of the exact decoder.

One pool of k specimens with prior p each and a constant sensitivity: by Bayes' rule (textbook,
closed form) P(pos) = (1 - Sp)(1 - p)^k + Se (1 - (1 - p)^k) and P(x_i = 1 | pos) = p Se / P(pos);
P(neg) = Sp (1 - p)^k + (1 - Se)(1 - (1 - p)^k) and P(x_i = 1 | neg) = p (1 - Se) / P(neg).
"""
import math

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.errors import ImpossibleEvidenceError
from bayespool.run import Run


def one_pool(k, result, p, replicates=1):
    layout = pd.DataFrame({"pool": ["A"] * k, "sample": [f"s{i}" for i in range(k)]})
    readouts = pd.DataFrame({"pool": ["A"] * replicates, "result": [result] * replicates})
    return Run.from_frames(layout, readouts, prevalence=p)


@pytest.mark.parametrize("k", [1, 2, 5, 10])
@pytest.mark.parametrize("se,sp", [(0.95, 0.99), (0.7, 0.9), (1.0, 0.98), (0.9, 1.0)])
def test_single_pool_positive_closed_form(k, se, sp):
    p = 0.05
    post = decode(one_pool(k, "positive", p), Assay(sp, ConstantSensitivity(se)), method="exact")
    q = (1 - p) ** k
    p_pos = (1 - sp) * q + se * (1 - q)
    assert np.allclose(post.probability, p * se / p_pos, rtol=1e-12, atol=0)
    assert math.isclose(post.log_evidence, math.log(p_pos), rel_tol=1e-12)


@pytest.mark.parametrize("k", [1, 3, 8])
@pytest.mark.parametrize("se,sp", [(0.95, 0.99), (0.6, 0.95), (0.9, 1.0)])
def test_single_pool_negative_closed_form(k, se, sp):
    p = 0.1
    post = decode(one_pool(k, "negative", p), Assay(sp, ConstantSensitivity(se)), method="exact")
    q = (1 - p) ** k
    p_neg = sp * q + (1 - se) * (1 - q)
    assert np.allclose(post.probability, p * (1 - se) / p_neg, rtol=1e-12, atol=0)


def test_perfect_assay_negative_pool_clears_everyone():
    # Se = 1: a negative readout rules out every positive member (hard constraint, exactly 0).
    post = decode(one_pool(4, "negative", 0.2), Assay(0.99, ConstantSensitivity(1.0)))
    assert np.all(post.probability == 0.0)
    assert post.calls().tolist() == ["negative"] * 4


def test_dilution_single_positive_member_of_pool():
    # Dilution model (interface.md): Se(k, d) = se_max / (1 + (k / (d r50))^slope).
    k, p = 4, 0.1
    sens = DilutionSensitivity(0.98, 2.0, 1.5)
    assay = Assay(0.97, sens)
    post = decode(one_pool(k, "positive", p), assay, method="exact")
    # brute force over the 2^k states, written independently of the decoder
    num = den = 0.0
    for state in range(2 ** k):
        bits = [(state >> b) & 1 for b in range(k)]
        d = sum(bits)
        like = (1 - 0.97) if d == 0 else 0.98 / (1 + (k / (d * 2.0)) ** 1.5)
        w = like * np.prod([p if b else 1 - p for b in bits])
        den += w
        num += w * bits[0]
    assert math.isclose(post.probability[0], num / den, rel_tol=1e-12)


def test_conflicting_replicates_under_perfect_assay_is_impossible():
    layout = pd.DataFrame({"pool": ["A", "A"], "sample": ["s1", "s2"]})
    readouts = pd.DataFrame({"pool": ["A", "A"], "result": ["positive", "negative"]})
    run = Run.from_frames(layout, readouts, prevalence=0.1)
    with pytest.raises(ImpossibleEvidenceError, match="A"):
        decode(run, Assay(1.0, ConstantSensitivity(1.0)))


def test_positive_pool_of_cleared_members_is_impossible():
    # Perfect assay: s1 and s2 are cleared by negative pools, so pool C cannot read positive.
    layout = pd.DataFrame({"pool": ["A", "B", "C", "C"], "sample": ["s1", "s2", "s1", "s2"]})
    readouts = pd.DataFrame({"pool": ["A", "B", "C"], "result": ["neg", "neg", "pos"]})
    run = Run.from_frames(layout, readouts, prevalence=0.1)
    with pytest.raises(ImpossibleEvidenceError, match="cannot be explained"):
        decode(run, Assay(1.0, ConstantSensitivity(1.0)))


def test_count_distribution_of_independent_untested_specimens_is_binomial():
    # Untested specimens keep their prior; the number positive is Binomial(n, p) (scipy.stats).
    from scipy.stats import binom
    layout = pd.DataFrame({"pool": [f"P{i}" for i in range(6)], "sample": [f"s{i}" for i in range(6)]})
    run = Run.from_frames(layout, pd.DataFrame({"pool": [], "result": []}), prevalence=0.3)
    post = decode(run, Assay(0.99, ConstantSensitivity(0.9)))
    assert np.allclose(post.probability, 0.3)
    assert np.allclose(post.count_distribution, binom.pmf(np.arange(7), 6, 0.3), atol=1e-15)
