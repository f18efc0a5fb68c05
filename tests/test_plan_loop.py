"""The closed loop (decode -> plan -> read -> repeat) against classic Dorfman testing.

Reference: Kim, Hudgens, Dreyfuss, Westreich & Pilcher (2007), Biometrics 63(4), Dorfman with test
error (from memory, references.md): tests per person 1/k + Se - (Se + Sp - 1) q^k, pooled
sensitivity Se^2, pooled specificity 1 - (1 - Sp)(Se - (Se + Sp - 1) q^(k - 1)), q = 1 - p; the
counting bound n H(p) (Aldridge, Johnson & Scarlett 2019). The full 600-specimen comparison is
scripts/eval_loop.py; this is a smaller, fast version.
"""
import math

import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.simulation.protocol import Tester as CohortTester
from bayespool.simulation.protocols.bayes import BayesianLoop


def kim_dorfman(p, se, sp, k):
    q = 1 - p
    tests = 1 / k + se - (se + sp - 1) * q ** k
    sens = se ** 2
    spec = 1 - (1 - sp) * (se - (se + sp - 1) * q ** (k - 1))
    return tests, p * (1 - sens) + q * (1 - spec)


def test_kim_closed_form_recalled_values():
    # references.md: best Dorfman pool at p = 0.02 is about k = 8, 0.275 tests per person (with
    # Se 0.95, Sp 0.99); without error it is Dorfman's 0.274 at k = 8 (Dorfman 1943, from memory)
    best = min(range(2, 40), key=lambda k: kim_dorfman(0.02, 0.95, 0.99, k)[0])
    assert best == 8
    assert kim_dorfman(0.02, 0.95, 0.99, 8)[0] == pytest.approx(0.275, abs=0.001)
    assert kim_dorfman(0.02, 1.0, 1.0, 8)[0] == pytest.approx(0.274, abs=0.001)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_noiseless_loop_decides_everyone_correctly(seed):
    rng = np.random.default_rng(seed)
    n = 48
    truth = rng.random(n) < 0.08
    perfect = Assay(1.0, ConstantSensitivity(1.0))
    proto = BayesianLoop(tests=12, max_pool_size=8, n_draws=400, seed=seed)
    out = proto.run(CohortTester(truth, perfect, rng), np.full(n, 0.08))
    assert proto.undecided_at_end == 0
    assert np.array_equal(out.calls, truth)
    assert out.tests < n  # cheaper than testing everyone alone


def test_loop_beats_dorfman_on_tests_and_errors():
    # 4 cohorts of 300 at p = 0.02, Se 0.95, Sp 0.99: fewer tests per specimen than Dorfman at its
    # best pool size, and at most half of its expected errors. The loop's expected errors are the
    # posterior probabilities of its wrong calls (unbiased, as cohorts are drawn from the model).
    p, se, sp, n, runs = 0.02, 0.95, 0.99, 300, 4
    assay = Assay(sp, ConstantSensitivity(se))
    dorf_tests, dorf_errors = min(kim_dorfman(p, se, sp, k) for k in range(2, 40))
    rng = np.random.default_rng(2024)
    tests = expected_errors = 0.0
    proto = BayesianLoop(seed=5)
    for _ in range(runs):
        truth = rng.random(n) < p
        out = proto.run(CohortTester(truth, assay, rng), np.full(n, p))
        assert proto.undecided_at_end == 0
        prob = proto.last_posterior.probability
        tests += out.tests
        expected_errors += float(np.sum(np.where(out.calls, 1 - prob, prob)))
    per_specimen = tests / (n * runs)
    assert per_specimen < dorf_tests
    assert expected_errors / (n * runs) <= 0.5 * dorf_errors
    # and no method can beat the counting bound n H(p) (Aldridge et al. 2019)
    h = -(p * math.log2(p) + (1 - p) * math.log2(1 - p))
    assert per_specimen > h


def test_loop_respects_a_total_material_limit():
    rng = np.random.default_rng(4)
    n = 64
    truth = rng.random(n) < 0.1
    assay = Assay(0.99, ConstantSensitivity(0.95))
    proto = BayesianLoop(tests=16, max_draws=3, n_draws=300, seed=1)
    tester = CohortTester(truth, assay, rng)
    proto.run(tester, np.full(n, 0.1))
    assert tester.draws.max() <= 3


def test_bayes_scheme_through_the_simulate_command(cli):
    import json
    r = cli("simulate", "--scheme", "bayes", "--samples", 80, "--prevalence", 0.03, "--runs", 2,
            "--tests", 24, "--seed", 1, "--json")
    assert r.code == 0, r.err
    out = json.loads(r.out)
    assert out["scheme"] == "bayes" and out["tests"] == 24
    assert 0 < out["tests_per_sample"] < 1
    r = cli("simulate", "--scheme", "bayes", "--samples", 80, "--prevalence", 0.03, "--runs", 2,
            "--pool-size", 8)
    assert r.code == 2 and "--pool-size" in r.err
