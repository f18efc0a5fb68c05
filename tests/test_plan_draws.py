"""Joint posterior draws against brute-force Bayes over every status vector.

Source: Bayes' rule on the model of design.md, P(x | y) proportional to prod_i prior_i^x_i
(1 - prior_i)^(1 - x_i) prod_t P(y_t | d_t(x)), enumerated here with itertools; the draws' state
frequencies are compared with scipy.stats.chisquare (Pearson's goodness-of-fit test).
"""
import itertools

import numpy as np
import pandas as pd
import pytest
from scipy.stats import chisquare

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.planning.draws import posterior_draws
from bayespool.run import Run

LAYOUT = pd.DataFrame({"pool": ["A"] * 5 + ["B"] * 3 + ["C"] * 2 + ["D"],
                       "sample": ["s0", "s1", "s2", "s3", "s4", "s0", "s1", "s2", "s3", "s4",
                                  "s9"]})
READOUTS = pd.DataFrame({"pool": ["A", "A", "B", "C", "D"],
                         "result": ["positive", "positive", "negative", "positive", "negative"]})


def brute_force(run, assay):
    m = run.n_samples
    states = np.array(list(itertools.product([0, 1], repeat=m)), dtype=np.uint8)
    logw = np.where(states == 1, np.log(run.prior), np.log1p(-run.prior)).sum(axis=1)
    for t in range(run.n_pools):
        d = states[:, run.members(t)].sum(axis=1)
        q = assay.positive_probability(np.full(len(d), run.pool_size[t]), d)
        with np.errstate(divide="ignore"):
            logw = logw + run.n_positive[t] * np.log(q) + run.n_negative[t] * np.log1p(-q)
    w = np.exp(logw - logw.max())
    return states, w / w.sum()


@pytest.mark.parametrize("assay", [Assay(0.98, ConstantSensitivity(0.9)),
                                   Assay(0.99, DilutionSensitivity(0.97, 3.0, 2.0))])
def test_exact_draws_follow_the_joint_posterior(assay):
    run = Run.from_frames(LAYOUT, READOUTS, prevalence=0.2)
    post = decode(run, assay)
    draws = posterior_draws(run, assay, post, 40_000, np.random.default_rng(1))
    states, prob = brute_force(run, assay)
    # the specimen alone in its pool is independent of the others: compare the joint of the rest
    joint = [i for i in range(run.n_samples) if run.sample_ids[i] != "s9"]
    code = draws[:, joint] @ (1 << np.arange(len(joint)))
    s_code = states[:, joint] @ (1 << np.arange(len(joint)))
    expected = np.bincount(s_code, weights=prob, minlength=2 ** len(joint))
    observed = np.bincount(code, minlength=2 ** len(joint))
    keep = expected * len(draws) > 5
    assert observed[~keep].sum() <= max(5, 3 * expected[~keep].sum() * len(draws))
    obs = np.append(observed[keep], observed[~keep].sum())
    exp = np.append(expected[keep], expected[~keep].sum()) * len(draws)
    assert chisquare(obs, exp * obs.sum() / exp.sum()).pvalue > 1e-3
    # marginals agree with the exact decoder
    assert np.abs(draws.mean(axis=0) - post.probability).max() < 0.015


def test_hard_constraints_never_drawn():
    # perfect assay: pool A positive, B (s0, s1, s2) negative -> s3 or s4 positive, s0..s2 not
    assay = Assay(1.0, ConstantSensitivity(1.0))
    run = Run.from_frames(LAYOUT.iloc[:8], READOUTS.iloc[[0, 2]], prevalence=0.3)
    post = decode(run, assay)
    draws = posterior_draws(run, assay, post, 5000, np.random.default_rng(2))
    idx = {s: i for i, s in enumerate(run.sample_ids)}
    assert draws[:, [idx["s0"], idx["s1"], idx["s2"]]].sum() == 0
    assert (draws[:, [idx["s3"], idx["s4"]]].sum(axis=1) >= 1).all()


def test_draws_are_reproducible_with_a_seed():
    assay = Assay(0.98, ConstantSensitivity(0.9))
    run = Run.from_frames(LAYOUT, READOUTS, prevalence=0.2)
    post = decode(run, assay)
    a = posterior_draws(run, assay, post, 100, np.random.default_rng(9))
    b = posterior_draws(run, assay, post, 100, np.random.default_rng(9))
    assert np.array_equal(a, b)
