"""The marginal likelihood of a run's readouts, log P(y | prevalence, assay), for latent fits.

Connected components of the sample-pool graph are independent given the parameters, so
log P(y) = sum_c log Z_c. Two kinds of component:

- a *pool with its follow-up*: one read pool of k > 1 specimens, every other read pool holding a
  single member (the Dorfman shape, also a negative pool alone). Given the pool's count d, the
  members are independent, so Z_c = prod_i s_i * sum_d P(d) L_pool[d], where member i weighs
  a_i = (1 - prevalence) L_i(0) and b_i = prevalence L_i(1) from its own tests, s_i = a_i + b_i, and
  P(d) is the Poisson-binomial distribution of the b_i / s_i, built by the usual recursion in
  O(k^2) (Dorfman 1943 pools of any size, batched over pools of equal size);
- anything else (arrays, overlapping designs): the exact decoder's Gray-code enumeration
  (bayespool.decoders.exact), within its limit of EXACT_LIMIT specimens per component.
"""
from __future__ import annotations

import dataclasses

import numpy as np
from numba import njit

from ..decoders.exact import EXACT_LIMIT, decode_exact
from ..decoders.graph import components
from ..errors import ImpossibleEvidenceError, InputError
from ..run import Run


@njit(cache=True)
def _pools_log_z(q, members, starts, loglik):
    """sum over pools b of log sum_d P_b(d) exp(loglik[starts[b] + d]), with P_b the
    Poisson-binomial distribution of q over the pool's members (members[b])."""
    n_pools, k = members.shape
    dist = np.empty(k + 1)
    total = 0.0
    for b in range(n_pools):
        dist[:] = 0.0
        dist[0] = 1.0
        for j in range(k):
            p = q[members[b, j]]
            for d in range(j + 1, 0, -1):
                dist[d] = dist[d] * (1.0 - p) + dist[d - 1] * p
            dist[0] *= 1.0 - p
        top = -np.inf
        for d in range(k + 1):
            if dist[d] > 0.0 and loglik[starts[b] + d] > top:
                top = loglik[starts[b] + d]
        if top == -np.inf:
            return -np.inf
        acc = 0.0
        for d in range(k + 1):
            if dist[d] > 0.0:
                acc += dist[d] * np.exp(loglik[starts[b] + d] - top)
        total += top + np.log(acc)
    return total


class Evidence:
    """log P(readouts | prevalence, assay) for one run, with the component split done once."""

    def __init__(self, run: Run):
        self.run = run
        self.comps = comps = components(run)
        read = run.pool_read
        size = run.pool_size
        groups: dict[int, list[tuple[int, np.ndarray]]] = {}
        exact = []
        for c in range(comps.n_components):
            pools = comps.pools_of(c)
            if len(pools) == 0:
                continue  # specimens in no read pool: factor 1
            big = pools[size[pools] > 1]
            members = comps.samples_of(c)
            if len(big) == 1 and size[big[0]] == len(members):
                groups.setdefault(int(size[big[0]]), []).append((int(big[0]), members))
            elif len(big) == 0 and len(members) == 1:
                groups.setdefault(1, []).append((-1, members))
            else:
                exact.append(c)
        self.exact = np.array(exact, dtype=np.int64)
        if len(self.exact) and comps.sizes[self.exact].max() > EXACT_LIMIT:
            worst = int(comps.sizes[self.exact].max())
            raise InputError(f"a connected group of {worst} specimens linked through shared pools "
                             "(not a single pool with individual follow-up) is above the exact "
                             f"likelihood's limit of {EXACT_LIMIT} specimens", run.sources.get(
                                 "layout"))
        # per group of equal pool size: the pool of each component and its members (B x k)
        self.groups = [(k, np.array([p for p, _ in rows], dtype=np.int64),
                        np.array([m for _, m in rows], dtype=np.int64))
                       for k, rows in sorted(groups.items())]
        # individual tests: which single-specimen read pools belong to which specimen
        singles = np.flatnonzero(read & (size == 1))
        self.single_pools = singles
        self.single_owner = run.pool_members[run.pool_ptr[singles]].astype(np.int64)

    def loglik(self, assay, prevalence: float) -> float:
        """log P(y | prevalence, assay); -inf when the assay makes the readouts impossible."""
        run = self.run
        ptr, ll = assay.log_likelihood(run.pool_size, run.n_positive, run.n_negative)
        total = 0.0
        if len(self.exact):
            with_prior = dataclasses.replace(run, prior=np.full(run.n_samples, prevalence))
            try:
                _, log_z, _, _ = decode_exact(with_prior, ptr, ll, self.comps, self.exact)
            except ImpossibleEvidenceError:
                return -np.inf
            total += float(log_z[self.exact].sum())
        if not self.groups:
            return total
        # each specimen's own tests: l_i(x) = sum over its single pools of log L[x]
        own = np.zeros((run.n_samples, 2))
        base = ptr[self.single_pools]
        np.add.at(own, self.single_owner, np.stack([ll[base], ll[base + 1]], axis=1))
        with np.errstate(divide="ignore"):
            log_a = np.log1p(-prevalence) + own[:, 0]
            log_b = np.log(prevalence) + own[:, 1]
        log_s = np.logaddexp(log_a, log_b)
        if not np.all(np.isfinite(log_s[np.concatenate([m.ravel() for _, _, m in self.groups])])):
            return -np.inf
        with np.errstate(invalid="ignore"):
            q = np.exp(log_b - log_s)
        for k, pools, members in self.groups:
            total += float(log_s[members].sum())
            if k == 1:
                continue  # a lone specimen with individual tests only: Z = s_i
            z = _pools_log_z(q, members, ptr[pools], ll)
            if not np.isfinite(z):
                return -np.inf
            total += float(z)
        return total
