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

from .rng import next_uniform
from .state import set_count


@njit(cache=True)
def site_sweep(sample_ptr, sample_pools, lik_ptr, delta, base_logit, shift, x, d, cur, rng,
               record, rb, watch, batch):
    """One sweep over every specimen (numbered in sweep order); returns the change in positives.

    ``cur[t, x_i]`` holds pool t's term for a member with status x_i (see state.set_count), so an
    update reads one cached value per pool and touches the tables only when a status changes.
    When ``record`` is true, adds each conditional probability to ``rb[i]`` and, for watched
    specimens (``watch[i] >= 0``), to ``batch[watch[i]]`` and the sampled status to
    ``batch[m + watch[i]]`` (m watched specimens: the indicator's diagnostics, which see what the
    conditional probability alone hides when the chain has not explored a rare state).
    """
    change = 0
    m = len(batch) // 2
    s0, s1 = rng[0], rng[1]  # the random state stays in registers during the sweep
    for i in range(len(x)):
        xi = x[i]
        lo = base_logit[i] + shift
        for b in range(sample_ptr[i], sample_ptr[i + 1]):
            lo += cur[sample_pools[b], xi]
        p = 1.0 / (1.0 + np.exp(-lo))
        u, s0, s1 = next_uniform(s0, s1)
        new = 1 if u < p else 0
        if new != xi:
            step = new - xi
            for b in range(sample_ptr[i], sample_ptr[i + 1]):
                t = sample_pools[b]
                set_count(t, d[t] + step, lik_ptr, delta, d, cur)
            x[i] = new
            change += step
        if record:
            rb[i] += p
            w = watch[i]
            if w >= 0:
                batch[w] += p
                batch[m + w] += new
    rng[0], rng[1] = s0, s1
    return change


class SingleSiteMove:
    """Gibbs update of every sampled specimen once per sweep (the move that carries the marginals)."""

    name = "single-site"

    def __repr__(self) -> str:
        return "SingleSiteMove()"
