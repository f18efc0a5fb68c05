"""Gibbs sampling of statuses and shared individual Cts jointly (``[ct]`` assays).

The state is every specimen's status x_i and, for a positive, its individual Ct c_i on the grid of
:func:`bayespool.decoders.ct_exact.exact_grid` (the trapezoid discretisation of the Ct mixture that
the exact decoder integrates with); each pool keeps the summed target amount of its positive
members, sum 2^(-c_i / s), so an update costs the specimen's number of pools times the grid.

- Site update of (x_i, c_i) jointly given the rest: with i removed, the weight of "i positive at
  grid node g" is w_g prod_t P(y_t | amount_t + 2^(-c_g / s)) and of "i negative" prod_t
  P(y_t | amount_t); x_i is drawn from their ratio (the c_i integral done on the grid) and, when
  positive, c_i from the normalised node weights. This is a birth/death of a positive with its Ct
  and a full-conditional update of the Ct in one step (Rao-Blackwellised marginals average the
  conditional probability).
- Pool swap (Metropolis-Hastings): in a pool with a positive a and a negative b, propose "b
  positive instead of a", b's Ct drawn from its conditional with a removed; the acceptance ratio
  is Z_b / Z_a, the two collapsed weights (Knill, Schliep & Torney 1996 for MCMC on pooling designs;
  the swap crosses the valley single-site moves cannot).

Several chains from spread starts; split R-hat and ESS from :mod:`bayespool.decoders.gibbs.diagnostics`
with the sampler's usual stopping rule (R-hat <= 1.01 and ESS >= 400, or the sweep cap).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from .ct_exact import exact_grid

LOG_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)


@njit(cache=True)
def _log_ndtr(z):
    if z > -30.0:
        return math.log(0.5 * math.erfc(-z / math.sqrt(2.0)))
    return -0.5 * z * z - math.log(-z) - LOG_SQRT_2PI


@njit(cache=True)
def _pool_log(t, amount, shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk, log0):
    """log P(readouts of pool t | its positive members' summed amount)."""
    if amount <= 0.0:
        return log0[t]
    c = shift[t] - s * math.log2(amount)
    out = 0.0
    if n_ct[t] > 0:
        out += n_ct[t] * (math.log(dmax) - math.log(sd) - LOG_SQRT_2PI)
        out -= 0.5 * (s2[t] - 2.0 * c * s1[t] + n_ct[t] * c * c) / (sd * sd)
    z = (cutoff - c) / sd
    if n_none[t] > 0:
        if dmax >= 1.0:
            out += n_none[t] * _log_ndtr(-z)
        else:
            out += n_none[t] * math.log1p(-dmax * math.exp(_log_ndtr(z)))
    if n_unk[t] > 0:
        out += n_unk[t] * (math.log(dmax) + _log_ndtr(z))
    return out


@njit(cache=True)
def _refresh(t, amount, amt, shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk, log0,
             row, row_amount, row_base):
    """Pool t's factor for every grid node added to its current amount (kept until it changes)."""
    if row_amount[t] == amount[t]:
        return
    row_amount[t] = amount[t]
    row_base[t] = _pool_log(t, amount[t], shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none,
                            n_unk, log0)
    for g in range(len(amt)):
        row[t, g] = _pool_log(t, amount[t] + amt[g], shift, s, sd, cutoff, dmax, n_ct, s1, s2,
                              n_none, n_unk, log0)


@njit(cache=True)
def _collapsed(i, sample_ptr, sample_pools, read, amount, amt, log_w, shift, s, sd, cutoff,
               dmax, n_ct, s1, s2, n_none, n_unk, log0, row, row_amount, row_base, val):
    """For specimen i (currently removed): fills val[g] and returns (log Z_1, log weight if
    negative), both without the prior."""
    base = 0.0
    for g in range(len(log_w)):
        val[g] = log_w[g]
    for a in range(sample_ptr[i], sample_ptr[i + 1]):
        t = sample_pools[a]
        if read[t]:
            _refresh(t, amount, amt, shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk,
                     log0, row, row_amount, row_base)
            base += row_base[t]
            for g in range(len(log_w)):
                val[g] += row[t, g]
    top = -np.inf
    for g in range(len(log_w)):
        if val[g] > top:
            top = val[g]
    if top == -np.inf:
        return -np.inf, base
    z = 0.0
    for g in range(len(log_w)):
        z += math.exp(val[g] - top)
    return top + math.log(z), base


@njit(cache=True)
def _draw_node(val, log_z):
    u = np.random.random()
    acc = 0.0
    for g in range(len(val)):
        acc += math.exp(val[g] - log_z)
        if u < acc:
            return g
    return len(val) - 1


@njit(cache=True)
def _set(i, g, sign, sample_ptr, sample_pools, amount, amt):
    for a in range(sample_ptr[i], sample_ptr[i + 1]):
        amount[sample_pools[a]] += sign * amt[g]
        if amount[sample_pools[a]] < 1e-300:
            amount[sample_pools[a]] = 0.0


@njit(cache=True)
def _chain(seed, sweeps, burn, x, node, specimens, logit_prior, pool_ptr, pool_members,
           sample_ptr, sample_pools, read, amt, log_w, shift, s, sd, cutoff, dmax, n_ct, s1, s2,
           n_none, n_unk, log0, swap_pools, rb, draws, hist):
    np.random.seed(seed)
    n_pools = len(pool_ptr) - 1
    amount = np.zeros(n_pools)
    row = np.empty((n_pools, len(log_w)))
    row_amount = np.full(n_pools, np.nan)
    row_base = np.zeros(n_pools)
    for i in specimens:
        if x[i]:
            _set(i, node[i], 1.0, sample_ptr, sample_pools, amount, amt)
    val = np.empty(len(log_w))
    val_b = np.empty(len(log_w))
    kept = 0
    for sweep in range(sweeps):
        for i in specimens:
            if x[i]:
                _set(i, node[i], -1.0, sample_ptr, sample_pools, amount, amt)
            lz, base = _collapsed(i, sample_ptr, sample_pools, read, amount, amt, log_w, shift,
                                  s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk, log0, row, row_amount, row_base, val)
            lo = logit_prior[i] + lz - base
            p1 = 1.0 / (1.0 + math.exp(-lo)) if lo > -700 else 0.0
            if np.random.random() < p1:
                x[i] = 1
                node[i] = _draw_node(val, lz)
                _set(i, node[i], 1.0, sample_ptr, sample_pools, amount, amt)
            else:
                x[i] = 0
            if sweep >= burn:
                rb[i] += p1
        for t in swap_pools:  # propose moving the positive status to another member of the pool
            k = pool_ptr[t + 1] - pool_ptr[t]
            a = pool_members[pool_ptr[t] + int(np.random.random() * k)]
            b = pool_members[pool_ptr[t] + int(np.random.random() * k)]
            if x[a] == 0 or x[b] == 1:
                continue
            _set(a, node[a], -1.0, sample_ptr, sample_pools, amount, amt)
            lz_a, base_a = _collapsed(a, sample_ptr, sample_pools, read, amount, amt, log_w,
                                      shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk,
                                      log0, row, row_amount, row_base, val)
            lz_b, base_b = _collapsed(b, sample_ptr, sample_pools, read, amount, amt, log_w,
                                      shift, s, sd, cutoff, dmax, n_ct, s1, s2, n_none, n_unk,
                                      log0, row, row_amount, row_base, val_b)
            r = (logit_prior[b] + lz_b - base_b) - (logit_prior[a] + lz_a - base_a)
            if lz_b > -np.inf and math.log(np.random.random() + 1e-300) < r:
                x[a] = 0
                x[b] = 1
                node[b] = _draw_node(val_b, lz_b)
                _set(b, node[b], 1.0, sample_ptr, sample_pools, amount, amt)
            else:
                _set(a, node[a], 1.0, sample_ptr, sample_pools, amount, amt)
        if sweep >= burn:
            for j in range(len(specimens)):
                i = specimens[j]
                draws[kept, j] = x[i]
                if x[i]:
                    hist[j, node[i]] += 1.0
            kept += 1
    return kept


def sample_ct(run, assay, stats, lik_ptr, loglik, specimens, *, chains=4, sweeps=2000, burn=500,
              seed=None):
    """Run the chains on ``specimens`` (a set closed under shared read pools).

    Returns ``(probability, draws, nodes, ct_hist)``: Rao-Blackwellised P(x_i = 1) for the listed
    specimens, indicator draws (chains, kept, specimens) and per specimen a histogram of its Ct
    draws over the grid nodes (kept draws where it is positive).
    """
    model = assay.ct
    nodes, log_w = exact_grid(model)
    step = 0.8 * min(model.noise_sd, min(model.sds))  # trapezoid: error ~ exp(-2 pi^2 / 0.64)
    nodes, mass = model.prior_grid(max(step, float(nodes[1] - nodes[0])))
    keep = mass > 1e-12 * mass.max()
    nodes, log_w = nodes[keep], np.log(mass[keep])
    s = model.cycles_per_doubling
    amt = np.exp2(-nodes / s)
    read = (stats.n_ct + stats.n_none + stats.n_unknown) > 0
    shift = s * np.log2(run.pool_size.astype(float))
    log0 = loglik[lik_ptr[:-1]]
    specimens = np.asarray(specimens, dtype=np.int64)
    prior = run.prior
    logit = np.log(prior) - np.log1p(-prior)
    member_pools = np.unique(np.concatenate([run.pools_of(int(i)) for i in specimens]))
    swap_pools = member_pools[read[member_pools] & (run.pool_size[member_pools] > 1)]
    rng = np.random.default_rng(seed)
    n = run.n_samples
    kept = sweeps - burn
    draws = np.zeros((chains, kept, len(specimens)), dtype=np.uint8)
    rb = np.zeros(n)
    ct_hist = np.zeros((len(specimens), len(nodes)))
    for ch in range(chains):
        x = np.zeros(n, dtype=np.uint8)
        node = np.zeros(n, dtype=np.int64)
        if ch % 2 == 1:  # spread starts: half the chains from a random half of positives
            x[specimens] = rng.random(len(specimens)) < 0.5
            node[specimens] = rng.integers(0, len(nodes), len(specimens))
        _chain(int(rng.integers(1 << 31)), sweeps, burn, x, node, specimens, logit,
               run.pool_ptr, run.pool_members.astype(np.int64), run.sample_ptr,
               run.sample_pools.astype(np.int64), read, amt, log_w, shift, s, model.noise_sd,
               model.cutoff, model.detection_max, stats.n_ct, stats.sum_ct, stats.sum_ct2,
               stats.n_none, stats.n_unknown, log0, swap_pools, rb, draws[ch], ct_hist)
    return rb[specimens] / (chains * kept), draws, nodes, ct_hist
