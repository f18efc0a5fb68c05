"""The M-step: a Bernoulli GLM with fractional responses.

Given each specimen's posterior probability w_i of being positive (the E-step), the expected
complete-data log-likelihood sum_i w_i log pi_i + (1 - w_i) log(1 - pi_i) is maximised over the
coefficients by Fisher scoring (iteratively reweighted least squares) with step halving. Its score,
sum_i (w_i - pi_i) c_i x_i with c_i = pi_i' / (pi_i (1 - pi_i)), is also the gradient of the
marginal log-likelihood of the readouts when w are the exact posterior marginals (Fisher's
identity; Louis 1982).
"""
from __future__ import annotations

import numpy as np

from . import links


def expected_loglik(X, w, beta, link: str) -> float:
    pi = links.inverse(link, X @ beta)
    return float(w @ np.log(pi) + (1.0 - w) @ np.log1p(-pi))


def score(X, w, beta, link: str) -> np.ndarray:
    """sum_i (w_i - pi_i) c_i x_i."""
    eta = X @ beta
    pi = links.inverse(link, eta)
    c = links.derivative(link, eta, pi) / (pi * (1.0 - pi))
    return X.T @ ((w - pi) * c)


def fisher_information(X, beta, link: str) -> np.ndarray:
    """sum_i pi_i'^2 / (pi_i (1 - pi_i)) x_i x_i^T (the complete-data expected information)."""
    eta = X @ beta
    pi = links.inverse(link, eta)
    weight = links.derivative(link, eta, pi) ** 2 / (pi * (1.0 - pi))
    return (X * weight[:, None]).T @ X


def maximise(X, w, beta, link: str, tol: float = 1e-11, max_iter: int = 100) -> np.ndarray:
    """The coefficients that maximise the expected complete-data log-likelihood, from ``beta``."""
    beta = np.array(beta, dtype=float)
    value = expected_loglik(X, w, beta, link)
    for _ in range(max_iter):
        step = np.linalg.lstsq(fisher_information(X, beta, link), score(X, w, beta, link),
                               rcond=None)[0]
        t = 1.0
        while True:
            trial = beta + t * step
            new = expected_loglik(X, w, trial, link)
            if new >= value - 1e-12 * abs(value) or t < 1e-8:
                break
            t /= 2
        done = np.max(np.abs(trial - beta)) < tol * (1 + np.max(np.abs(beta)))
        beta, value = trial, new
        if done:
            break
    return beta
