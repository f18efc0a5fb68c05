"""Estimates on the edge of (0, 1) written as values strictly inside it, and the fit's spread.

A maximum-likelihood specificity of exactly 1 (no false positive among the negative controls) or a
sensitivity parameter of exactly 1 (every readout it covers detected) is common in ordinary
validation sets, yet decode would read it as a hard constraint: every positive pool proven to hold a
positive member. The data never showed that certainty, so the assay file gets a value inside the
range by a stated rule, and the maximum-likelihood value stays in ``[fit]``:

- specificity: the median of its Jeffreys posterior Beta(x + 1/2, n - x + 1/2) for x negative
  readouts among n of pools without a positive member (Jeffreys 1946, Proc. R. Soc. A 186;
  Brown, Cai & DasGupta 2001, Statistical Science 16(2), section 4.1.2);
- a sensitivity parameter on the logit scale (a constant Se, se_max, a table entry): the inner end of
  its 50% profile-likelihood interval, where the profile deviance reaches the median of chi-square
  with one degree of freedom (0.455), the other parameters refitted there. For a single binomial
  count with every trial a success both rules put 1 - p at about 0.2275 / n (n = 100: 0.00227 and
  0.00227), so the two rules agree where they overlap.

``spread`` gives the distribution decode's ``--assay-uncertainty`` integrates over: the Jeffreys
posterior of the specificity, Beta(x + 1/2, n - x + 1/2), and draws of the sensitivity parameters
from their posterior under Jeffreys' prior (density sqrt(det I(u)) on the unconstrained scale, I the
expected information; Jeffreys 1946), by sampling-importance-resampling (Rubin 1988, Bayesian
Statistics 3) from a Student-t proposal around the written values. A normal approximation would not
do: at a parameter near 1 the likelihood is one-sided on the logit scale and a symmetric normal
puts far too much weight on low sensitivities.
"""
from __future__ import annotations

import numpy as np
from scipy.stats import beta, chi2

from .curve import covariance
from .mle import Profiler

RULE_SPECIFICITY = "median of the Jeffreys posterior (the maximum-likelihood value is on the edge)"
RULE_SENSITIVITY = ("inner end of the 50% profile-likelihood interval (the maximum-likelihood "
                    "value is on the edge)")
DEVIANCE_MEDIAN = float(chi2.ppf(0.5, 1))
DRAWS = 400            # resampled posterior draws written to the assay file
PROPOSALS = 8000       # importance draws they are resampled from
PROPOSAL_DF = 4.0      # Student-t proposal: heavier tails than the posterior
PROPOSAL_SCALE = 2.0   # times the inverse-information scale at the written values


def jeffreys(successes: float, trials: float) -> tuple[float, float]:
    """Parameters of the Jeffreys posterior Beta(x + 1/2, n - x + 1/2)."""
    return float(successes) + 0.5, float(trials) - float(successes) + 0.5


def specificity_inside(negatives: float, trials: float) -> float:
    """The written specificity when every (or no) control read negative: the Jeffreys median."""
    a, b = jeffreys(negatives, trials)
    return float(beta.ppf(0.5, a, b))


def sensitivity_inside(fit) -> tuple[np.ndarray, list[str]]:
    """Free parameters (unconstrained) with every logit parameter on its bound moved inside.

    Returns the new free vector and the names of the parameters moved. Each one goes to the inner
    end of its 50% profile-likelihood interval; then the parameters that were not on a bound are
    refitted with the moved ones held.
    """
    opt, space = fit.optimum, fit.space
    edge = np.array([p.scale == "logit" and bool(lo or hi) for p, lo, hi in
                     zip(space.free_params, opt.at_lower, opt.at_upper)], dtype=bool)
    if not edge.any():
        return np.asarray(opt.u, dtype=float).copy(), []
    profiler = Profiler(fit.objective, opt, space.bounds, jac=True, level=0.5,
                        local=fit.objective.local, restarts=fit.starts[:1])
    u = np.asarray(opt.u, dtype=float).copy()
    for j in np.flatnonzero(edge):
        prof = profiler.interval(int(j))
        u[j] = prof.lower if opt.at_upper[j] else prof.upper
    if (~edge).any():
        u, _ = fit.objective.local(u, mask=~edge, tol=1e-10, decrement_tol=1e-13)
    return u, [space.free_params[j].name for j in np.flatnonzero(edge)]


def spread(fit, u_written, sp_counts, draws: int = DRAWS, seed: int = 0) -> dict:
    """The ``[fit.uncertainty]`` table: what decode's ``--assay-uncertainty`` integrates over.

    ``sp_counts`` is (negative readouts, readouts) of pools without a positive member, or None when
    the specificity was fixed. ``sensitivity_draws`` holds ``draws`` posterior draws of the free
    sensitivity parameters on their unconstrained scale (rows), ``sensitivity_ess`` the effective
    number of the importance draws they were resampled from.
    """
    out = {"rule": "specificity: its Jeffreys posterior, a beta distribution with the parameters "
                   "specificity_beta; sensitivity parameters: draws from their posterior under "
                   "Jeffreys' prior on the logit or log scale (importance resampling)"}
    if sp_counts is not None:
        a, b = jeffreys(*sp_counts)
        out["specificity_beta"] = [a, b]
    params = fit.space.free_params
    if params:
        sims, ess = _posterior_draws(fit, np.asarray(u_written, dtype=float), draws, seed)
        out["sensitivity_parameters"] = [p.name for p in params]
        out["sensitivity_scales"] = [p.scale for p in params]
        out["sensitivity_ess"] = round(float(ess), 1)
        out["sensitivity_draws"] = [[float(f"{v:.8g}") for v in row] for row in sims]
    return out


def _posterior_draws(fit, centre: np.ndarray, draws: int, seed: int):
    """Sampling-importance-resampling of the free parameters under Jeffreys' prior."""
    rng = np.random.default_rng(seed)
    n_par = len(centre)
    info = fit.objective.fisher(centre)
    cov = covariance(info, np.zeros(n_par, dtype=bool))
    w, v = np.linalg.eigh(0.5 * (cov + cov.T))
    root = v * np.sqrt(np.clip(w, 1e-8, None)) * PROPOSAL_SCALE
    z = rng.standard_normal((PROPOSALS, n_par))
    g = rng.chisquare(PROPOSAL_DF, PROPOSALS) / PROPOSAL_DF
    t = z / np.sqrt(g)[:, None]
    sims = centre + t @ root.T
    lo = np.array([p.lower for p in fit.space.free_params])
    hi = np.array([p.upper for p in fit.space.free_params])
    log_q = -0.5 * (PROPOSAL_DF + n_par) * np.log1p((t ** 2).sum(axis=1) / PROPOSAL_DF)
    log_w = np.full(PROPOSALS, -np.inf)
    inside = np.flatnonzero(np.all((sims >= lo) & (sims <= hi), axis=1))
    loglik, info = fit.objective.at_rows(sims[inside])
    sign, logdet = np.linalg.slogdet(info)
    ok = sign > 0
    log_w[inside[ok]] = loglik[ok] + 0.5 * logdet[ok] - log_q[inside[ok]]
    weights = np.exp(log_w - log_w.max())
    weights /= weights.sum()
    ess = 1.0 / np.sum(weights ** 2)
    pick = rng.choice(PROPOSALS, size=draws, replace=True, p=weights)
    return sims[pick], ess
