"""Exact decoding with Ct readouts: enumerate statuses, integrate the shared individual Cts.

For every status vector of a small linked group, the weight is the prior times the readouts'
probability integrated over the individual Cts of the positive specimens, each Ct shared by all the
pools that hold the specimen. The integral factorises over clusters of positives linked through
pools that hold two or more of them; each cluster is a |Q|-dimensional integral over the mixture of
individual Cts, taken by the trapezoid rule on a uniform grid (step 0.6 x the smaller of noise_sd and
the narrowest component sd; tails beyond 7 sds dropped, about 3e-12 of the mass). The integrands are
smooth on the scale of noise_sd, where the trapezoid rule on a uniform grid converges geometrically
(relative error of order exp(-2 pi^2 (noise_sd / step)^2), below 1e-9 at this step). A cluster whose
tensor would pass :data:`GRID_BUDGET` points takes a coarser step (four axes: about 1 cycle on the
default span, a relative error of order 1e-3 on those states' already small weights). The tests
check the whole against an independent brute force on grids of other steps. A cluster's integral depends only on its
members, so it is computed once per group. Pools without a positive member take L_t[0].

Two or more positives of a cluster that are read in one pool only enter that pool through the sum
of their amounts, so they are integrated as one axis with the distribution of their effective Ct
(:meth:`bayespool.ct.CtModel.effective_ct`). States with a cluster of more than :data:`JOINT_LIMIT`
axes are left out; their prior probability is reported, and the result says it is exact up to them.
Posterior individual Cts (given that a specimen is positive) come from the same integrals.
"""
from __future__ import annotations

import math

import numpy as np

from ..ct import _logsumexp
from ..errors import ImpossibleEvidenceError

CT_EXACT_LIMIT = 12   # largest group enumerated with Ct readouts (4096 states)
JOINT_LIMIT = 5       # most integration axes of one cluster of positives
GRID_BUDGET = 5 * 10 ** 6  # grid points of one cluster's tensor; beyond it the step grows
STEP_FACTOR = 0.6


def grid_step(model, axes: int = 1) -> float:
    """Step of the joint integrals' grid in cycles: 0.6 x the narrowest feature, coarser when a
    cluster has so many axes that the tensor would pass :data:`GRID_BUDGET` points."""
    nodes, _ = model.prior_grid(model.step)
    span = float(nodes[-1] - nodes[0])
    return max(STEP_FACTOR * min(model.noise_sd, min(model.sds)),
               span / (GRID_BUDGET ** (1.0 / axes) - 1))


def exact_grid(model, axes: int = 1):
    """Nodes and log masses of the individual-Ct mixture for the joint integrals."""
    nodes, mass = model.prior_grid(grid_step(model, axes))
    keep = mass > 1e-14 * mass.max()
    with np.errstate(divide="ignore"):
        return nodes[keep], np.log(mass[keep])


def _rebin(nodes, mass, step):
    """A fine distribution moved onto a coarser step (mass-weighted mean position per cell)."""
    cell = np.floor((nodes - nodes[0]) / step).astype(np.int64)
    m = np.bincount(cell, mass)
    x = np.bincount(cell, mass * nodes)
    keep = m > 0
    return x[keep] / m[keep], m[keep]


class _Group:
    """One linked group: its specimens, read pools (local member lists) and their statistics."""

    def __init__(self, run, stats, samples, pools, loglik0):
        self.samples = np.asarray(samples)
        local = {int(s): j for j, s in enumerate(self.samples)}
        self.pools = np.asarray(pools)
        self.members = [np.array([local[int(s)] for s in run.members(int(t))]) for t in self.pools]
        self.size = run.pool_size[self.pools].astype(float)
        self.stats = stats.take(self.pools)
        self.loglik0 = loglik0
        self.pools_of = [[] for _ in self.samples]
        for a, mem in enumerate(self.members):
            for j in mem:
                self.pools_of[j].append(a)


def _axis_members(group: _Group, cluster: tuple) -> list:
    """Integration axes of a cluster: one per member, except that two or more members read in one
    pool only are summed into one axis holding their effective Ct (:meth:`CtModel.effective_ct`)."""
    private: dict = {}
    axes = []
    for j in cluster:
        if len(group.pools_of[j]) == 1:
            private.setdefault(group.pools_of[j][0], []).append(j)
        else:
            axes.append((j,))
    return axes + [tuple(v) for v in private.values()]


def _axes(model, group: _Group, cluster: tuple):
    """(nodes, log masses, members) of every integration axis of a cluster."""
    members = _axis_members(group, cluster)
    nodes, log_w = exact_grid(model, len(members))
    out = []
    for mem in members:
        if len(mem) == 1:
            out.append((nodes, log_w, mem))
            continue
        eff_nodes, eff_mass = _rebin(*model.effective_ct(len(mem)), grid_step(model, len(members)))
        with np.errstate(divide="ignore"):
            out.append((eff_nodes, np.log(eff_mass), mem))
    return out


def _cluster_integral(model, nodes, group: _Group, cluster: tuple):
    """log of the integral over the Cts of ``cluster`` (local indices) and, for members on an axis
    of their own, the log marginal of their Ct (unnormalised, interpolated onto ``nodes``)."""
    axes = _axes(model, group, cluster)
    q = len(axes)
    s = model.cycles_per_doubling
    owner = {j: a for a, (_, _, members) in enumerate(axes) for j in members}

    def along(a, values):
        shape = [1] * q
        shape[a] = len(values)
        return values.reshape(shape)
    total = 0.0
    for a, (nd, lw, _) in enumerate(axes):
        total = total + along(a, lw)
    touched = sorted({p for j in cluster for p in group.pools_of[j]})
    st = group.stats
    for p in touched:
        inside = sorted({owner[j] for j in group.members[p] if j in owner})
        amt = 0.0
        for a in inside:
            amt = amt + along(a, np.exp2(-axes[a][0] / s))
        pool_ct = s * math.log2(group.size[p]) - s * np.log2(amt)
        total = total + model.log_readout_factor(pool_ct, st.n_ct[p], st.sum_ct[p],
                                                 st.sum_ct2[p], st.n_none[p], st.n_unknown[p])
    total = np.broadcast_to(total, tuple(len(ax[0]) for ax in axes))
    log_i = float(_logsumexp(total.reshape(-1), axis=0))
    marginals = {}
    for a, (ax_nodes, _, members) in enumerate(axes):
        if len(members) == 1:
            mg = _logsumexp_axes(total, tuple(b for b in range(q) if b != a))
            if len(ax_nodes) != len(nodes) or ax_nodes[0] != nodes[0]:  # coarser: per-cycle density
                mg = np.interp(nodes, ax_nodes, mg - math.log(ax_nodes[1] - ax_nodes[0]),
                               left=-np.inf, right=-np.inf) + math.log(nodes[1] - nodes[0])
            marginals[members[0]] = mg
    return log_i, marginals, q


def _logsumexp_axes(x, axes):
    if not axes:
        return x
    top = np.max(x, axis=axes, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.sum(np.exp(x - top), axis=axes)) + np.squeeze(top, axes)


def _clusters(group: _Group, positives: list) -> list:
    """Positives linked through pools holding two or more of them (union-find)."""
    parent = {j: j for j in positives}

    def find(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a
    pos = set(positives)
    for mem in group.members:
        inside = [j for j in mem if j in pos]
        for b in inside[1:]:
            ra, rb = find(inside[0]), find(b)
            if ra != rb:
                parent[rb] = ra
    out: dict = {}
    for j in positives:
        out.setdefault(find(j), []).append(j)
    return [tuple(sorted(v)) for v in out.values()]


def decode_group(model, run, stats, samples, pools, loglik_ptr, loglik, nodes,
                 joint_limit: int = JOINT_LIMIT):
    """Exact posterior of one linked group.

    Returns ``(probability, ct_log_marginal, log_z, counts, omitted)``: P(x_i = 1) per specimen of
    ``samples``, each specimen's unnormalised log posterior of its Ct on ``nodes`` given that it is
    positive (-inf where it cannot be; NaN where some state summed it with others), the group's log evidence, the distribution of its number of
    positives, and the prior probability of the states left out (clusters above ``joint_limit``).
    """
    loglik0 = loglik[loglik_ptr[np.asarray(pools)]]
    group = _Group(run, stats, samples, pools, loglik0)
    m = len(samples)
    prior = run.prior[group.samples]
    log_p, log_q = np.log(prior), np.log1p(-prior)
    cache: dict = {}
    state_w = []
    state_pos = []
    state_marg = []
    omitted = 0.0
    for mask in range(1 << m):
        positives = [j for j in range(m) if (mask >> j) & 1]
        lp = float(log_q.sum() + sum(log_p[j] - log_q[j] for j in positives))
        clusters = _clusters(group, positives)
        for c in clusters:
            if c not in cache:
                cache[c] = (_cluster_integral(model, nodes, group, c)
                            if len(_axis_members(group, c)) <= joint_limit else None)
        if any(cache[c] is None for c in clusters):
            omitted += math.exp(lp)
            continue
        touched = {p for j in positives for p in group.pools_of[j]}
        w = lp + float(sum(loglik0[p] for p in range(len(group.pools)) if p not in touched))
        marg = {}
        for c in clusters:
            log_i, mg, _ = cache[c]
            w += log_i
            for j in c:
                marg[j] = mg[j] - log_i if j in mg else None
        state_w.append(w)
        state_pos.append(positives)
        state_marg.append(marg)
    w = np.array(state_w)
    log_z = float(_logsumexp(w, axis=0)) if len(w) else -np.inf
    if not np.isfinite(log_z):
        raise impossible_group(run, samples, pools)
    post = np.exp(w - log_z)
    prob = np.zeros(m)
    counts = np.zeros(m + 1)
    ct_marg = np.full((m, len(nodes)), -np.inf)
    for pw, positives, marg in zip(post, state_pos, state_marg):
        counts[len(positives)] += pw
        if pw == 0.0:
            continue
        for j in positives:
            prob[j] += pw
            if marg[j] is None:  # summed with others into one effective Ct: no marginal here
                ct_marg[j] = np.nan
            elif not np.isnan(ct_marg[j, 0]):
                ct_marg[j] = np.logaddexp(ct_marg[j], math.log(pw) + marg[j])
    return np.minimum(prob, 1.0), ct_marg, log_z, counts, omitted


def impossible_group(run, samples, pools) -> ImpossibleEvidenceError:
    """The error for a linked group whose readouts no status vector explains."""
    return ImpossibleEvidenceError(
        "no status of the specimens " + ", ".join(str(run.sample_ids[s]) for s in samples)
        + " explains the readouts of pools "
        + ", ".join(str(run.pool_ids[t]) for t in pools) + " under the Ct model")


def ct_summary(nodes, log_marginal, level: float = 0.95):
    """Posterior mean and central interval of a Ct from its log marginal on the grid (NaN when the
    specimen cannot be positive)."""
    if not np.isfinite(log_marginal).any():
        return math.nan, math.nan, math.nan
    w = np.exp(log_marginal - np.max(log_marginal))
    w /= w.sum()
    cdf = np.cumsum(w)
    tail = (1 - level) / 2
    return (float(w @ nodes), float(np.interp(tail, cdf, nodes)),
            float(np.interp(1 - tail, cdf, nodes)))
