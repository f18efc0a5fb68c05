"""Expected information of pooled readouts against closed forms.

Sources: for a readout that is a deterministic function of the statuses, I(Y; X) = H(Y) (Shannon
1948; Cover & Thomas, Elements of Information Theory, 2nd ed. 2006, chapter 2, from memory); the
probability that a pool of independent specimens reads positive is Se * (1 - prod(1 - p_i)) +
(1 - Sp) * prod(1 - p_i) for a constant assay (Kim et al. 2007, Biometrics 63(4), from memory), and
with a dilution assay the number of positives is binomial (scipy.stats.binom as the reference).
"""
import itertools
import math

import numpy as np
import pytest
from scipy.stats import binom
from scipy.stats import entropy as scipy_entropy

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.planning import joint_information, pool_information
from bayespool.planning.information import readout_table

PERFECT = Assay(1.0, ConstantSensitivity(1.0))
NOISY = Assay(0.99, ConstantSensitivity(0.95))
DILUTED = Assay(0.995, DilutionSensitivity(0.98, 6.0, 1.5))


def h2(p):
    return float(scipy_entropy([p, 1 - p], base=2))


def states_as_draws(probs):
    """Every status vector of independent specimens as a weighted draw (exact expectation)."""
    states = np.array(list(itertools.product([0, 1], repeat=len(probs))), dtype=np.uint8)
    weights = np.prod(np.where(states == 1, probs, 1 - np.asarray(probs)), axis=1)
    return states, weights


@pytest.mark.parametrize("p", [0.5, 0.2, 0.03, 0.97])
def test_single_specimen_perfect_assay_is_entropy_of_p(p):
    # I(Y; X) = H(Y) = H(p) when Y = X (Cover & Thomas 2006, from memory)
    draws = np.array([[0], [1]], dtype=np.uint8)
    prob, info = pool_information(draws, [0], PERFECT, weights=[1 - p, p])
    assert prob == pytest.approx(p, abs=1e-15)
    assert info == pytest.approx(h2(p), abs=1e-12)


def test_single_specimen_from_random_draws_near_entropy():
    # Monte Carlo over 200k draws: within 5 standard errors of H(p)
    rng = np.random.default_rng(7)
    p = 0.2
    draws = (rng.random((200_000, 1)) < p).astype(np.uint8)
    _, info = pool_information(draws, [0], PERFECT)
    # dH/dp * se(p_hat)
    se = abs(math.log2((1 - p) / p)) * math.sqrt(p * (1 - p) / len(draws))
    assert abs(info - h2(p)) < 5 * se


@pytest.mark.parametrize("probs", [[0.1, 0.2, 0.05], [0.02] * 6, [0.3, 0.01, 0.5, 0.12]])
def test_pool_of_independent_specimens_matches_closed_form(probs):
    # Kim et al. 2007 (from memory): P(pool positive) = Se (1 - prod q_i) + (1 - Sp) prod q_i;
    # information = H2(P(+)) - [prod q_i H2(1 - Sp) + (1 - prod q_i) H2(Se)]
    se, sp = 0.95, 0.99
    q0 = float(np.prod(1 - np.asarray(probs)))
    p_pos = se * (1 - q0) + (1 - sp) * q0
    expected = h2(p_pos) - (q0 * h2(1 - sp) + (1 - q0) * h2(se))
    draws, weights = states_as_draws(probs)
    prob, info = pool_information(draws, range(len(probs)), NOISY, weights=weights)
    assert prob == pytest.approx(p_pos, rel=1e-12)
    assert info == pytest.approx(expected, rel=1e-10)


def test_pool_with_dilution_uses_the_count_of_positives():
    # d ~ Binomial(k, p) (scipy.stats.binom); P(+) = sum_d P(d) q(k, d), q(k, 0) = 1 - Sp,
    # q(k, d) = se_max / (1 + (k / (d r50))^slope) (the dilution family of interface.md)
    k, p = 8, 0.15
    d = np.arange(k + 1)
    pd_ = binom.pmf(d, k, p)
    q = np.where(d == 0, 1 - 0.995, 0.98 / (1 + (k / (np.maximum(d, 1) * 6.0)) ** 1.5))
    p_pos = float(np.sum(pd_ * q))
    expected = h2(p_pos) - float(np.sum(pd_ * np.array([h2(v) for v in q])))
    draws, weights = states_as_draws([p] * k)
    prob, info = pool_information(draws, range(k), DILUTED, weights=weights)
    assert prob == pytest.approx(p_pos, rel=1e-12)
    assert info == pytest.approx(expected, rel=1e-10)
    # a lone positive in 8 is read less often than one in 2: the dilution effect (Hwang 1976)
    table = readout_table(DILUTED, 8)
    assert table[8, 1] < table[2, 1]


def test_joint_information_of_repeated_perfect_test_adds_nothing():
    # with a perfect assay a second reading of the same pool is determined by the first
    p = 0.3
    draws, weights = states_as_draws([p])
    assert joint_information(draws, [[0], [0]], PERFECT, weights) == pytest.approx(h2(p))


def test_joint_information_matches_brute_force_enumeration():
    # I(Y1, Y2; X) = H(Y1, Y2) - sum_j E H(Yj | X), with the outcome distribution enumerated here
    probs = [0.2, 0.4, 0.1]
    pools = [[0, 1], [1, 2], [0]]
    draws, weights = states_as_draws(probs)
    se, sp = 0.95, 0.99
    py = {}
    cond = 0.0
    for x, w in zip(draws, weights):
        qs = [se if x[list(m)].sum() > 0 else 1 - sp for m in pools]
        cond += w * sum(h2(q) for q in qs)
        for y in itertools.product([0, 1], repeat=len(pools)):
            py[y] = py.get(y, 0.0) + w * np.prod([q if yi else 1 - q for q, yi in zip(qs, y)])
    expected = scipy_entropy(list(py.values()), base=2) - cond
    assert joint_information(draws, pools, NOISY, weights) == pytest.approx(expected, rel=1e-10)
