"""Link functions for individual risk: pi = g^-1(eta) and d pi / d eta.

``logit`` (the default, log-odds linear in the covariates) and ``cloglog`` (complementary
log-log, under which a pool of k identical specimens is negative with probability
exp(-k exp(eta)), so pool-level data follow a cloglog GLM with offset log k; Farrington 1992).
Risks are kept within [RISK_FLOOR, 1 - RISK_FLOOR] so that they are valid priors for the decoders.
"""
from __future__ import annotations

import numpy as np
from scipy.special import expit

from ...defaults import REGRESSION_LINKS

LINKS = REGRESSION_LINKS
RISK_FLOOR = 1e-12


def inverse(link: str, eta: np.ndarray) -> np.ndarray:
    """pi = g^-1(eta), clipped to [RISK_FLOOR, 1 - RISK_FLOOR]."""
    if link == "logit":
        pi = expit(eta)
    else:
        pi = -np.expm1(-np.exp(np.minimum(eta, 700.0)))
    return np.clip(pi, RISK_FLOOR, 1.0 - RISK_FLOOR)


def derivative(link: str, eta: np.ndarray, pi: np.ndarray) -> np.ndarray:
    """d pi / d eta."""
    if link == "logit":
        return pi * (1.0 - pi)
    eta = np.minimum(eta, 700.0)
    return np.exp(eta - np.exp(eta))


def link(link_name: str, pi: float) -> float:
    """g(pi) for one risk (starting values)."""
    if link_name == "logit":
        return float(np.log(pi / (1.0 - pi)))
    return float(np.log(-np.log1p(-pi)))
