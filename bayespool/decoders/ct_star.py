"""Exact Ct decoding of a star group: one pool holding every specimen, the rest read alone.

Dorfman's two stages give such groups: a positive pool of k and each member's individual test.
The members' Cts meet only in the hub pool, and there only through the sum of their amounts
2^(-c_j / s), so the sum over the 2^k status vectors and the k-dimensional integral over Cts become
one pass over the members (a dynamic programme over "the effective Ct of the positives so far"):

    state after member j = (the weight of "no positive yet", the distribution of the effective Ct
                            of the positives among members 1..j, by their number)
    adding member j:  negative -> weights times (1 - prior_j) L_own[0]
                      positive -> combined with prior_j x mixture x own readouts' factor at c_j

Effective Cts live on a uniform lattice of step :attr:`bayespool.ct.CtModel.step` (at most 0.1
cycles); two combined values split their mass linearly between the two lattice nodes around them,
the discretisation of :meth:`bayespool.ct.CtModel.effective_ct` (relative error about 4e-4 on tail
likelihoods at this step, O(step^2)). The cost is O(k^2) combinations of two lattice distributions
instead of 2^k tensor integrals, with no states left out. A specimen's marginal comes from the
members before it and after it merged (prefix and suffix passes); its Ct's posterior given that it
is positive is read off on the caller's grid.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from ..ct import _logsumexp
from .ct_exact import impossible_group

PRUNE = 1e-18   # lattice masses below this fraction of a distribution's largest are dropped


def star_hub(run, samples, pools) -> int | None:
    """The hub pool's index in ``pools`` when every specimen of the group is in it and every other
    pool holds one specimen; otherwise None."""
    size = run.pool_size[np.asarray(pools)]
    big = np.flatnonzero(size > 1)
    if len(big) != 1 or int(size[big[0]]) != len(samples) or np.any(size[size != len(samples)] != 1):
        return None
    return int(big[0])


@njit(cache=True)
def _combine_kernel(a_base, a_mass, b_base, b_mass, up, frac, base, size):
    """Masses of the combined effective Ct on the lattice (see :meth:`_Lattice.combine`)."""
    out = np.zeros(size)
    for i in range(len(a_mass)):
        ia = a_base + i
        wa = a_mass[i]
        if wa == 0.0:
            continue
        for j in range(len(b_mass)):
            ib = b_base + j
            w = wa * b_mass[j]
            d = ia - ib if ia >= ib else ib - ia
            low = (ib if ia >= ib else ia) - up[d] - base
            f = frac[d]
            out[low] += w * (1.0 - f)
            out[low + 1] += w * f
    return out


class _Lattice:
    """Distributions of an effective Ct on the lattice origin + step * i: (first index, masses
    summing to 1, log of their total weight)."""

    def __init__(self, model, origin: float, step: float):
        self.model, self.origin, self.step = model, origin, step

    def nodes(self, dist) -> np.ndarray:
        base, mass, _ = dist
        return self.origin + self.step * (base + np.arange(len(mass)))

    def make(self, nodes, log_w):
        """A distribution from log weights on lattice nodes (or None when all are -inf)."""
        top = float(np.max(log_w)) if len(log_w) else -np.inf
        if not np.isfinite(top):
            return None
        w = np.exp(log_w - top)
        keep = np.flatnonzero(w > PRUNE)
        w = w[keep[0]:keep[-1] + 1]
        total = w.sum()
        base = int(round((nodes[keep[0]] - self.origin) / self.step))
        return base, w / total, top + math.log(total)

    def combine(self, a, b):
        """The effective Ct of two independent groups of positives (mass split linearly).

        On a lattice the combined value min(c_a, c_b) - s log2(1 + 2^(-|c_a - c_b| / s)) lies a
        fixed fraction of steps below the smaller node for each index difference, so the split
        is precomputed per difference (:meth:`_offsets`) and the kernel does plain arithmetic."""
        n = max(len(a[1]), len(b[1])) + abs(a[0] - b[0]) + 1
        up, frac = self._offsets(n)
        base = min(a[0], b[0]) - int(up[0])
        mass = _combine_kernel(a[0], a[1], b[0], b[1], up, frac, base,
                               max(a[0] + len(a[1]), b[0] + len(b[1])) - base + 1)
        return self._trim(base, mass, a[2] + b[2])

    def _offsets(self, n: int):
        if getattr(self, "_cache", None) is None or len(self._cache[0]) < n:
            s, h = self.model.cycles_per_doubling, self.step
            delta = np.arange(max(n, 64))
            c = s * np.log2(1.0 + np.exp2(-delta * h / s)) / h
            up = np.ceil(c)
            self._cache = (up.astype(np.int64), up - c)
        return self._cache

    def add(self, a, b):
        """The mixture a + b of two weighted distributions (either may be None)."""
        if a is None or b is None:
            return a if b is None else b
        top = max(a[2], b[2])
        base = min(a[0], b[0])
        size = max(a[0] + len(a[1]), b[0] + len(b[1])) - base
        mass = np.zeros(size)
        for d in (a, b):
            mass[d[0] - base:d[0] - base + len(d[1])] += d[1] * math.exp(d[2] - top)
        return self._trim(base, mass, top)

    def scale(self, a, log_factor: float):
        return None if a is None or not np.isfinite(log_factor) else (a[0], a[1], a[2] + log_factor)

    @staticmethod
    def _trim(base, mass, log_total):
        keep = np.flatnonzero(mass > PRUNE * mass.max())
        mass = mass[keep[0]:keep[-1] + 1]
        total = mass.sum()
        return base + int(keep[0]), mass / total, log_total + math.log(total)


def _merge(lat, x, y):
    """Two independent sets of members merged: (log weight of no positive, distribution)."""
    atom = x[0] + y[0]
    dist = lat.add(lat.scale(x[1], y[0]), lat.scale(y[1], x[0]))
    if x[1] is not None and y[1] is not None:
        dist = lat.add(dist, lat.combine(x[1], y[1]))
    return atom, dist


def decode_star(model, run, stats, samples, pools, hub: int, loglik_ptr, loglik, nodes):
    """The result of :func:`bayespool.decoders.ct_exact.decode_group` for a star group, with no
    state left out: the lattice pass at steps h and h / 2 (h = :attr:`bayespool.ct.CtModel.step`)
    combined by Richardson extrapolation, (4 R(h / 2) - R(h)) / 3, which removes the O(h^2) error
    of the linear mass split (probabilities, log evidence and count distribution; the Ct's
    posterior is that of the finer pass)."""
    h = model.step
    coarse = star_pass(model, run, stats, samples, pools, hub, loglik_ptr, loglik, nodes, step=h)
    fine = star_pass(model, run, stats, samples, pools, hub, loglik_ptr, loglik, nodes,
                     step=h / 2)
    prob = np.clip((4.0 * fine[0] - coarse[0]) / 3.0, 0.0, 1.0)
    log_z = (4.0 * fine[2] - coarse[2]) / 3.0
    counts = np.clip((4.0 * fine[3] - coarse[3]) / 3.0, 0.0, None)
    return prob, fine[1], log_z, counts / counts.sum(), 0.0


def star_pass(model, run, stats, samples, pools, hub: int, loglik_ptr, loglik, nodes, *,
              step: float | None = None):
    """One lattice pass of :func:`decode_star` at ``step`` (default
    :attr:`bayespool.ct.CtModel.step`)."""
    samples, pools = np.asarray(samples), np.asarray(pools)
    m = len(samples)
    s = model.cycles_per_doubling
    lattice_nodes, lattice_mass = model.prior_grid(model.step if step is None else step)
    lat = _Lattice(model, float(lattice_nodes[0]), float(lattice_nodes[1] - lattice_nodes[0]))
    hub_pool = int(pools[hub])
    local = {int(x): j for j, x in enumerate(samples)}
    own = [[] for _ in range(m)]
    for a, t in enumerate(pools):
        if a != hub:
            own[local[int(run.members(int(t))[0])]].append(int(t))
    with np.errstate(divide="ignore"):
        log_prior_fine = np.log(lattice_mass)
        coarse_mass = np.interp(nodes, lattice_nodes, lattice_mass)
        log_prior_coarse = np.log(coarse_mass / coarse_mass.sum())

    def factor(t, ct):
        return model.log_readout_factor(ct + s * math.log2(run.pool_size[t]), stats.n_ct[t],
                                        stats.sum_ct[t], stats.sum_ct2[t], stats.n_none[t],
                                        stats.n_unknown[t])

    prior = run.prior[samples]
    neg = np.empty(m)
    tilt = []
    tilt_coarse = []
    for j in range(m):
        l0 = sum(float(loglik[loglik_ptr[t]]) for t in own[j])
        neg[j] = math.log1p(-prior[j]) + l0
        f = log_prior_fine + math.log(prior[j])
        g = log_prior_coarse + math.log(prior[j])
        for t in own[j]:
            f = f + factor(t, lattice_nodes)
            g = g + factor(t, nodes)
        tilt.append(lat.make(lattice_nodes, f))
        tilt_coarse.append(g)

    hub_shift = s * math.log2(run.pool_size[hub_pool])
    hub_args = (stats.n_ct[hub_pool], stats.sum_ct[hub_pool], stats.sum_ct2[hub_pool],
                stats.n_none[hub_pool], stats.n_unknown[hub_pool])
    hub_empty = float(loglik[loglik_ptr[hub_pool]])

    def hub_total(atom, dist):
        """log of the weight of a set of members with the hub's readouts applied."""
        out = atom + hub_empty
        if dist is not None:
            f = model.log_readout_factor(lat.nodes(dist) + hub_shift, *hub_args)
            with np.errstate(divide="ignore"):
                out = np.logaddexp(out, dist[2] + _logsumexp(np.log(dist[1]) + f, axis=0))
        return float(out)

    # the count distribution: one pass keeping the positives' number (dists[c], c >= 1)
    atom = 0.0
    dists = [None] * (m + 1)
    for j in range(m):
        new = [None] * (m + 1)
        for c in range(1, j + 2):
            stay = lat.scale(dists[c], neg[j])
            grow = lat.scale(tilt[j], atom) if c == 1 else (
                lat.combine(dists[c - 1], tilt[j]) if dists[c - 1] is not None and
                tilt[j] is not None else None)
            new[c] = lat.add(stay, grow)
        atom += neg[j]
        dists = new
    counts_log = np.array([atom + hub_empty] + [hub_total(-np.inf, dists[c]) if dists[c] is not
                                                None else -np.inf for c in range(1, m + 1)])
    log_z = float(_logsumexp(counts_log, axis=0))
    if not np.isfinite(log_z):
        raise impossible_group(run, samples, pools)
    counts = np.exp(counts_log - log_z)

    # each member's marginal from the members before and after it
    prefix = [(0.0, None)]
    for j in range(m):
        prefix.append(_merge(lat, prefix[-1], (neg[j], tilt[j])))
    suffix = [(0.0, None)] * (m + 1)
    for j in range(m - 1, -1, -1):
        suffix[j] = _merge(lat, (neg[j], tilt[j]), suffix[j + 1])
    prob = np.zeros(m)
    ct_marg = np.full((m, len(nodes)), -np.inf)
    for j in range(m):
        o_atom, o_dist = _merge(lat, prefix[j], suffix[j + 1])
        with_j = lat.add(lat.scale(tilt[j], o_atom),
                         lat.combine(o_dist, tilt[j]) if o_dist is not None and tilt[j] is not None
                         else None)
        prob[j] = math.exp(hub_total(-np.inf, with_j) - log_z) if with_j is not None else 0.0
        # the Ct's posterior on the caller's grid: own readouts, the others' amounts, the hub
        term = o_atom + model.log_readout_factor(nodes + hub_shift, *hub_args)
        if o_dist is not None:
            g = lat.nodes(o_dist)
            f = model.log_readout_factor(model.combine(nodes[:, None], g[None, :]) + hub_shift,
                                         *hub_args)
            with np.errstate(divide="ignore"):
                term = np.logaddexp(term, o_dist[2] + _logsumexp(f + np.log(o_dist[1])[None, :],
                                                                 axis=1))
        ct_marg[j] = tilt_coarse[j] + term - log_z
    return np.minimum(prob, 1.0), ct_marg, log_z, counts, 0.0
