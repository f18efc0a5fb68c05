"""Group testing regression: individual risk on covariates from pooled readouts.

Each specimen i is positive with probability pi_i = g^-1(x_i' beta); pools and their readouts
follow the assay model (Se(k, d), Sp). The coefficients maximise the marginal likelihood of the
readouts, P(readouts | beta) = sum over statuses of prod_i pi_i^x_i (1 - pi_i)^(1 - x_i)
prod_t L_t[d_t], found by EM over the latent statuses (Vansteelandt, Goetghebeur & Verstraeten
2000; Xie 2001): the E-step gives each specimen's posterior probability under the current risks,
the M-step refits a Bernoulli GLM to those probabilities (:mod:`.mstep`).

- ``exact``: the E-step enumerates each group of linked specimens (:mod:`.estep`); EM is then
  finished by quasi-Newton steps on the same exact log-likelihood with its exact gradient (Fisher's
  identity), and the standard errors come from the observed information, the central-difference
  derivative of that gradient.
- ``gibbs``: for groups too large to enumerate, Monte Carlo EM with the Gibbs sampler as E-step
  (:mod:`.mcem`); approximate by its Monte Carlo error, which the result reports.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import minimize

from ...decoders.exact import EXACT_LIMIT
from ...errors import InputError
from ..checks import check_level
from . import links, mstep
from .design import design_matrix
from .estep import ExactEStep
from .result import RegressionFit

__all__ = ["fit_regression", "METHODS"]

METHODS = ("auto", "exact", "gibbs")


def _check(link, method, level, max_iter):
    if link not in links.LINKS:
        raise InputError(f"`link` must be one of {', '.join(links.LINKS)}, got {link!r}")
    if method not in METHODS:
        raise InputError(f"`method` must be one of {', '.join(METHODS)}, got {method!r}")
    level = check_level(level)
    if isinstance(max_iter, bool) or not isinstance(max_iter, (int, np.integer)) or max_iter < 1:
        raise InputError(f"`max_iter` must be a whole number >= 1, got {max_iter!r}")
    return level


def start_values(X: np.ndarray, run, tested: np.ndarray, link: str) -> np.ndarray:
    """Coefficients giving every specimen the minimum infection rate (positive pools per tested
    specimen, kept within [1e-4, 0.5]): a safe start for EM."""
    pos = np.flatnonzero(run.n_positive > 0)
    rate = len(pos) / max(int(tested.sum()), 1)
    eta = links.link(link, min(max(rate, 1e-4), 0.5))
    return np.linalg.lstsq(X, np.full(len(X), eta), rcond=None)[0]


def observed_information(gradient, beta: np.ndarray) -> np.ndarray:
    """Minus the Jacobian of the log-likelihood's gradient, by central differences, symmetrised."""
    p = len(beta)
    H = np.empty((p, p))
    for j in range(p):
        h = 1e-5 * max(1.0, abs(beta[j]))
        e = np.zeros(p)
        e[j] = h
        H[:, j] = (gradient(beta + e) - gradient(beta - e)) / (2 * h)
    return -(H + H.T) / 2


def covariance(info: np.ndarray, notes: list) -> np.ndarray:
    """The inverse observed information; NaN with a note when it is not positive definite."""
    try:
        np.linalg.cholesky(info)
        return np.linalg.inv(info)
    except np.linalg.LinAlgError:
        notes.append("the observed information is not positive definite (the readouts do not "
                     "determine every coefficient): no standard errors")
        return np.full(info.shape, np.nan)


def _fit_exact(estep: ExactEStep, X, tested, link, max_iter, tol):
    run = estep.run
    Xt = X[tested]

    def evaluate(beta):
        prob, ll = estep(links.inverse(link, X @ beta))
        return prob[tested], ll

    beta = start_values(X, run, tested, link)
    prob, ll = evaluate(beta)
    converged, it = False, 0
    for it in range(1, max_iter + 1):
        beta = mstep.maximise(Xt, prob, beta, link)
        prob, new = evaluate(beta)
        if abs(new - ll) <= tol * (1.0 + abs(new)):
            converged, ll = True, new
            break
        ll = new

    def negative(beta):
        w, value = evaluate(beta)
        return -value, -mstep.score(Xt, w, beta, link)

    # finish on the exact likelihood: EM is slow where pools hide much of the information
    polish = minimize(negative, beta, jac=True, method="BFGS", options={"gtol": 1e-9,
                                                                        "maxiter": 500})
    if np.isfinite(polish.fun) and -polish.fun >= ll - 1e-9 * (1 + abs(ll)):
        beta, ll = polish.x, -float(polish.fun)
        converged = converged or bool(polish.success)
    gradient = lambda b: mstep.score(Xt, evaluate(b)[0], b, link)
    converged = converged or float(np.max(np.abs(gradient(beta)))) < 1e-6
    return beta, ll, it, converged, observed_information(gradient, beta)


def fit_regression(run, assay, *, formula: str, link: str = "logit", method: str = "auto",
                   level: float = 0.95, seed=None, max_iter: int = 1000,
                   tol: float = 1e-9, draws: int = 2000) -> RegressionFit:
    """Fit individual risk on covariates from pooled readouts (group testing regression).

    Parameters
    ----------
    run : bayespool.run.Run
        Layout, readouts and a samples file with the covariates (any layout: Dorfman with
        retests, arrays, several pools per specimen, individual follow-up tests).
    assay : bayespool.assay.Assay
        Specificity and Se(k, d).
    formula : str
        Right-hand side of the model, e.g. ``"age + C(site)"`` (formulaic syntax).
    link : {'logit', 'cloglog'}
    method : {'auto', 'exact', 'gibbs'}
        ``auto`` enumerates when every group of linked specimens is small enough (at most
        ``EXACT_LIMIT`` specimens), else Monte Carlo EM with the Gibbs sampler.
    level : float
        Level of the Wald intervals of the coefficients.
    seed : int, optional
        Seed of the Gibbs sampler (``gibbs`` only).
    max_iter : int
        Cap on EM iterations.
    tol : float
        EM stops when the log-likelihood changes by less than ``tol`` (relative); quasi-Newton
        steps on the exact likelihood then finish the fit (exact path).
    draws : int
        Joint posterior draws kept for Louis's information (Gibbs path).

    Returns
    -------
    RegressionFit

    Raises
    ------
    InputError
        A bad formula or option (naming the parameter), or readouts the assay makes impossible.

    References
    ----------
    Vansteelandt, Goetghebeur & Verstraeten (2000), Biometrics 56; Xie (2001), Statistics in
    Medicine 20 (EM); McMahan, Tebbs, Hanson & Bilder (2017), Biometrics 73(4).

    Examples
    --------
    >>> import bayespool
    >>> run = bayespool.read_run("datasets/surveillance/layout.csv",
    ...                          "datasets/surveillance/readouts.csv",
    ...                          "datasets/surveillance/samples.csv")
    >>> fit = bayespool.fit_regression(run, bayespool.read_assay("datasets/surveillance/assay.toml"),
    ...                                formula="age + C(exposed)")
    >>> fit.to_frame().index.tolist()
    ['Intercept', 'age', 'C(exposed)[T.yes]']
    """
    level = _check(link, method, level, max_iter)
    design = design_matrix(run, formula)
    tested = np.zeros(run.n_samples, dtype=bool)
    read = run.pool_read
    tested[run.pool_members[np.repeat(read, run.pool_size)]] = True
    if not tested.any():
        raise InputError("no sample is in a pool with a readout: nothing to fit",
                         run.sources.get("readouts"))
    X = design.X
    if np.linalg.matrix_rank(X[tested]) < X.shape[1]:
        raise InputError(f"`formula` {formula!r}: over the tested samples the columns "
                         f"{', '.join(design.terms)} are not linearly independent (a category "
                         "with no tested sample?)")
    notes = []
    estep = ExactEStep(run, assay)
    chosen = method
    if method == "auto":
        chosen = "exact" if estep.feasible() else "gibbs"
        if chosen == "gibbs":
            notes.append(f"a group of {estep.largest_group} linked samples is above the exact "
                         f"limit of {EXACT_LIMIT}: Monte Carlo EM with the Gibbs sampler")
    elif method == "exact" and not estep.feasible():
        raise InputError(f"`method` 'exact': a group of {estep.largest_group} samples linked "
                         f"through shared pools is above the limit of {EXACT_LIMIT}; use "
                         "'gibbs' or 'auto'")
    monte_carlo = None
    if chosen == "exact":
        beta, ll, iters, converged, info = _fit_exact(estep, X, tested, link, max_iter, tol)
    else:
        from .mcem import fit_mcem
        beta, ll, iters, converged, info, monte_carlo = fit_mcem(
            run, assay, X, tested, link, seed=seed, draws=draws,
            start=start_values(X, run, tested, link))
    cov = covariance(info, notes)
    if not converged:
        notes.append("the fit did not converge within the iteration cap")
    risk = links.inverse(link, X @ beta)
    return RegressionFit(design.terms, beta, cov, level, link, design.formula, chosen,
                         ll if ll is not None and math.isfinite(ll) else None, iters, converged,
                         run.sample_ids, risk, int(tested.sum()), int(read.sum()), run.samples,
                         notes, monte_carlo)
