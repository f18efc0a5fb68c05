"""Monte Carlo EM for designs whose linked groups are too large to enumerate (arrays, several
pools per specimen across a whole plate).

The E-step is the project's Gibbs sampler over the latent statuses (single-site updates and pool
swaps, Rao-Blackwellised marginals; the Gibbs approach to group testing regression of McMahan,
Tebbs, Hanson & Bilder 2017, Biometrics 73, 1443-1452, used here inside EM as in Xie 2001); the
M-step is the same Bernoulli GLM as in exact EM. The number of sweeps grows with the iterations
so that Monte Carlo noise shrinks as EM closes in (Wei & Tanner 1990). The observed information
comes from Louis's (1982) formula on the final run's joint draws: the complete-data information
minus the posterior covariance of the complete-data score. The result is approximate by the
Monte Carlo error, which it reports.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from ...decoders.gibbs.sampler import GibbsSampler
from . import links, mstep

CHAINS = 2
WARMUP = 200
FIRST_SWEEPS, LAST_SWEEPS, GROWTH = 100, 3000, 1.35
MAX_ITERATIONS = 60
STABLE = 1e-3   # largest coefficient change counted as settled once sweeps reach SETTLE_FROM
SETTLE_FROM = 1000


def _second_derivatives(link: str, eta, pi):
    """d2 log pi / d eta2 and d2 log(1 - pi) / d eta2."""
    if link == "logit":
        v = -pi * (1.0 - pi)
        return v, v
    e = np.exp(np.minimum(eta, 700.0))
    a = e * (1.0 - pi) / pi - e * e * (1.0 - pi) / pi ** 2
    return a, -e


def louis_information(X, beta, link, marginals, draws) -> np.ndarray:
    """Observed information = E[complete information | y] - Cov[complete score | y] (Louis 1982),
    the expectations over the posterior draws (rows of ``draws``, columns matching ``X``)."""
    eta = X @ beta
    pi = links.inverse(link, eta)
    a, b = _second_derivatives(link, eta, pi)
    weight = -(marginals * a + (1.0 - marginals) * b)
    complete = (X * weight[:, None]).T @ X
    c = links.derivative(link, eta, pi) / (pi * (1.0 - pi))
    scores = ((draws.astype(float) - pi[None, :]) * c[None, :]) @ X   # (draws, p)
    return complete - np.cov(scores, rowvar=False).reshape(len(beta), len(beta))


def fit_mcem(run, assay, X, tested, link, *, seed=None, draws: int = 2000, start=None):
    """Monte Carlo EM; returns (beta, None, iterations, settled, information, monte_carlo)."""
    rng = np.random.default_rng(seed)
    lik_ptr, loglik = run.log_likelihood(assay)
    idx = np.flatnonzero(tested)
    Xt = X[idx]
    beta = np.array(start, dtype=float)

    def sample(beta, sweeps, keep):
        prior = links.inverse(link, X @ beta)
        r = dataclasses.replace(run, prior=prior)
        sampler = GibbsSampler(r, lik_ptr, loglik, idx, chains=CHAINS)
        res = sampler.sample(seed=rng, warmup=WARMUP, min_sweeps=sweeps, max_sweeps=sweeps,
                             max_draws=keep, negative_below=0.5, positive_above=0.5)
        pos = np.searchsorted(res.specimens, idx)
        return res.probability[pos], res.draws[:, pos]

    sweeps, settled, changes = float(FIRST_SWEEPS), 0, []
    it = 0
    for it in range(1, MAX_ITERATIONS + 1):
        w, _ = sample(beta, int(sweeps), 8)
        new = mstep.maximise(Xt, w, beta, link)
        change = float(np.max(np.abs(new - beta)))
        changes.append(change)
        beta = new
        settled = settled + 1 if (change < STABLE and sweeps >= SETTLE_FROM) else 0
        if settled >= 2:
            break
        sweeps = min(sweeps * GROWTH, LAST_SWEEPS)
    w, d = sample(beta, LAST_SWEEPS, int(draws))
    final = mstep.maximise(Xt, w, beta, link)
    info = louis_information(Xt, final, link, w, d)
    monte_carlo = {"iterations": it, "final_sweeps_per_chain": LAST_SWEEPS, "chains": CHAINS,
                   "posterior_draws": int(d.shape[0]),
                   "last_change": float(np.max(np.abs(final - beta))),
                   "note": "Monte Carlo EM: estimates carry Monte Carlo error of about the last "
                           "change; the information is from Louis's formula on the draws"}
    return final, None, it, settled >= 2, info, monte_carlo
