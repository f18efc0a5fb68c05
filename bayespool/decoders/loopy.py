"""Loopy groups too large to enumerate: the sampler where affordable, BP marked elsewhere.

Belief propagation can converge to a wrong answer on a graph with loops (Murphy, Weiss & Jordan
1999, "Loopy belief propagation for approximate inference: an empirical study"), and on small dense
pooling groups it does so by up to 0.5 (``scripts/bp_accuracy.py``). So, in ``auto``, once BP has
run, the loopy groups it converged on are re-decoded by the Gibbs sampler, smallest first, while
their specimens add up to at most ``sampler_limit`` (the rule: the sampler's cost grows with the
specimens it follows, about a second per few hundred on one core); one chain starts from BP's
marginals. Where BP's answer is kept (groups past the limit, marked ``bp-loopy``), the groups
the sampler re-decoded tell how far BP was from it: :func:`loopy_check`.
"""
from __future__ import annotations

import numpy as np

from ..defaults import LOOPY_SAMPLER_LIMIT as SAMPLER_LIMIT
CHECK_Z = 5.0        # a difference beyond this many Monte Carlo errors is not sampling noise


def loopy_for_sampler(comps, components: np.ndarray, tree: np.ndarray, skip: np.ndarray,
                      limit: int) -> np.ndarray:
    """The loopy ``components`` (not in ``skip``) the sampler takes: smallest first, while their
    specimens add up to at most ``limit``."""
    loopy = components[~tree[components]]
    loopy = loopy[~np.isin(loopy, skip)]
    sizes = comps.sizes[loopy]
    order = np.argsort(sizes, kind="stable")
    return np.sort(loopy[order][np.cumsum(sizes[order]) <= limit]).astype(np.int64)


def loopy_check(bp_probability: np.ndarray, sampled, specimens: np.ndarray,
                n_groups: int) -> dict:
    """BP against the sampler on the loopy groups the sampler re-decoded: the largest difference
    and how many specimens differ by more than ``CHECK_Z`` Monte Carlo errors."""
    diff = np.abs(bp_probability[specimens] - sampled.probability[specimens])
    mcse = sampled.mcse[specimens] if sampled.mcse is not None else np.zeros(len(specimens))
    return {"groups": int(n_groups), "samples": int(len(specimens)),
            "max_bp_difference": float(diff.max()) if len(diff) else 0.0,
            "beyond_mc_error": int(np.sum(diff > CHECK_Z * mcse + 1e-12))}


def check_text(check: dict) -> str:
    """The sentence a warning gives about the check."""
    return (f"on the {check['groups']} loopy group(s) ({check['samples']} samples) re-decoded by "
            f"the Gibbs sampler, BP differed from it by up to {check['max_bp_difference']:.3g} "
            f"({check['beyond_mc_error']} sample(s) beyond {CHECK_Z:g} Monte Carlo errors)")
