"""R-hat, ESS and MCSE against ArviZ (reference library) on the same draws.

Reference: ArviZ ``rhat(method="rank")``, ``ess(method="bulk")``, ``ess(method="mean")`` and
``mcse(method="mean")``, which implement Vehtari et al. (2021), Bayesian Analysis 16(2).
"""
import warnings

import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.decoders.gibbs import ess, ess_mean, mcse, rhat, run_sampler

from .test_gibbs import loopy_run

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    import arviz as az


def ar1_chains(rng, chains, draws, phi, offset_sd=0.0):
    x = np.zeros((chains, draws))
    x[:, 0] = rng.normal(size=chains)
    for t in range(1, draws):
        x[:, t] = phi * x[:, t - 1] + rng.normal(size=chains)
    return x + rng.normal(size=(chains, 1)) * offset_sd


@pytest.mark.parametrize("seed", range(8))
def test_diagnostics_match_arviz_on_autocorrelated_chains(seed):
    rng = np.random.default_rng(seed)
    chains, draws = int(rng.integers(2, 6)), int(rng.integers(20, 700))
    x = ar1_chains(rng, chains, draws, float(rng.uniform(-0.5, 0.98)), float(rng.uniform(0, 1)))
    if seed % 2:
        x = (x > np.quantile(x, 0.7)).astype(float)  # indicators, many ties
    assert rhat(x) == pytest.approx(float(az.rhat(x, method="rank")), rel=1e-9)
    assert ess(x) == pytest.approx(float(az.ess(x, method="bulk")), rel=1e-9)
    assert ess_mean(x) == pytest.approx(float(az.ess(x, method="mean")), rel=1e-9)
    assert mcse(x) == pytest.approx(float(np.ravel(az.mcse(x, method="mean"))[0]), rel=1e-9)


def test_diagnostics_match_arviz_on_the_samplers_own_draws():
    run = loopy_run(0, prevalence=0.3)
    lik_ptr, loglik = run.log_likelihood(Assay(0.9, ConstantSensitivity(0.85)))
    res = run_sampler(run, lik_ptr, loglik, seed=7)
    chains = res.diagnostics["chains"]
    draws = res.draws.reshape(chains, -1, run.n_samples).astype(float)
    varying = np.flatnonzero(draws.reshape(-1, run.n_samples).std(axis=0) > 0)
    assert len(varying) >= 5
    ours_r, ours_e = rhat(draws[:, :, varying]), ess(draws[:, :, varying])
    for k, i in enumerate(varying):
        assert ours_r[k] == pytest.approx(float(az.rhat(draws[:, :, i], method="rank")), rel=1e-9)
        assert ours_e[k] == pytest.approx(float(az.ess(draws[:, :, i], method="bulk")), rel=1e-9)


def test_stuck_chains_have_large_rhat_and_constant_draws_are_converged():
    rng = np.random.default_rng(1)
    stuck = np.concatenate([rng.normal(0, 1, (2, 500)), rng.normal(3, 1, (2, 500))])
    assert rhat(stuck) > 1.5
    const = np.zeros((4, 100, 2))
    const[:, :, 1] = rng.normal(size=(4, 100))
    assert rhat(const)[0] == 1.0 and ess(const)[0] == 400 and mcse(const)[0] == 0.0


def test_average_ranks_match_scipy_rankdata():
    # reference: scipy.stats.rankdata(method="average")
    from scipy.stats import rankdata

    from bayespool.decoders.gibbs.diagnostics import average_ranks
    rng = np.random.default_rng(3)
    a = rng.integers(0, 5, size=(200, 7)).astype(float)
    a[:, 3] = rng.normal(size=200)
    a[:, 4] = 1.0
    assert np.array_equal(average_ranks(a), rankdata(a, method="average", axis=0))


def test_combined_rhat_ess_equals_the_separate_functions():
    from bayespool.decoders.gibbs.diagnostics import rhat_ess
    x = np.random.default_rng(4).normal(size=(4, 301, 3)).cumsum(axis=1)
    r, e = rhat_ess(x)
    assert np.allclose(r, rhat(x), rtol=1e-12) and np.allclose(e, ess(x), rtol=1e-12)
