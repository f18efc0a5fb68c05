"""Single-site Gibbs update of each specimen's status, with Rao-Blackwellised accumulation.

Given everything else, x_i = 1 has log-odds logit(prior_i) + sum over i's read pools t of
(log L_t[d_t^{-i} + 1] - log L_t[d_t^{-i}]), where d_t^{-i} is the number of positive members of t
other than i. The per-pool counts d_t are kept current, so an update costs i's number of pools. The
conditional probability itself is accumulated (Rao-Blackwellisation: Gelfand & Smith (1990),
Sampling-based approaches to calculating marginal densities, JASA 85(410)), which has a smaller
variance than counting the sampled indicators.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .rng import uniform


@njit(cache=True)
def site_sweep(sample_ptr, sample_pools, lik_ptr, delta, near, base_logit, shift, x, d,
               rng, record, rb, watch, batch):
    """One sweep over every specimen (numbered in sweep order); returns the change in positives.

    ``near[t, j]`` equals ``delta[lik_ptr[t] + j]`` for small j (see model.py). When ``record`` is true, adds each conditional probability to ``rb[i]`` and, for watched
    specimens (``watch[i] >= 0``), to ``batch[watch[i]]``.
    """
    change = 0
    n_near = near.shape[1]
    for i in range(len(x)):
        xi = x[i]
        lo = base_logit[i] + shift
        for b in range(sample_ptr[i], sample_ptr[i + 1]):
            t = sample_pools[b]
            dm = d[t] - xi
            if dm < n_near:
                lo += near[t, dm]
            else:
                lo += delta[lik_ptr[t] + dm]
        p = 1.0 / (1.0 + np.exp(-lo))
        new = 1 if uniform(rng) < p else 0
        if new != xi:
            step = new - xi
            for b in range(sample_ptr[i], sample_ptr[i + 1]):
                d[sample_pools[b]] += step
            x[i] = new
            change += step
        if record:
            rb[i] += p
            w = watch[i]
            if w >= 0:
                batch[w] += p
    return change


class SingleSiteMove:
    """Gibbs update of every sampled specimen once per sweep (the move that carries the marginals)."""

    name = "single-site"
    kernel = staticmethod(site_sweep)

    def __repr__(self) -> str:
        return "SingleSiteMove()"
