"""The posterior as the kernels see it: flat arrays built once from a run and an assay.

Sampled specimens are renumbered 0..m-1 in sweep order (``order[u]`` is the run's index of specimen
u), ordered by their first read pool so that consecutive updates touch neighbouring memory. Only read
pools take part (an unread pool carries no information). For every read pool t the table
``delta[lik_ptr[t] + j] = log L_t[j + 1] - log L_t[j]`` turns a single-site update into a sum over the
specimen's pools (the chains cache the terms of their current counts, see state.py). A likelihood of zero (Se or Sp of 1)
becomes ``-PENALTY``: a state that breaks a hard constraint then weighs exp(-PENALTY) = 0 in double
precision against any allowed state, so the posterior over allowed states is exact, while a chain
started in a forbidden state still has finite log-odds that lead it out. A chain still in a
forbidden state after warm-up is handled by the driver (impossible evidence when every chain is).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...csr import csr

PENALTY = 1.0e6  # log-weight of one broken hard constraint


@dataclass(frozen=True)
class GibbsModel:
    """Arrays of one sampling problem; specimens are numbered in sweep order."""

    order: np.ndarray         # int64 (m,): run index of each sampled specimen
    pool_ptr: np.ndarray      # int64: run's pool -> members CSR ...
    pool_members: np.ndarray  # int32: ... members renumbered (-1: not sampled)
    sample_ptr: np.ndarray    # int64 (m + 1,): specimen -> read pools CSR
    sample_pools: np.ndarray  # int32
    lik_ptr: np.ndarray       # int64: pool t's tables start at lik_ptr[t]
    loglik: np.ndarray        # float64: log L_t[d], with -PENALTY for log 0
    delta: np.ndarray         # float64: log L_t[d + 1] - log L_t[d]
    base_logit: np.ndarray    # float64 (m,): logit of the prior, 0 when prevalence is shared
    swap_pools: np.ndarray    # int32: read pools with a positive readout and two or more members
    read: np.ndarray          # bool (n_pools,)
    positive_member: np.ndarray  # bool (m,): member of a pool with a positive readout

    @classmethod
    def build(cls, run, lik_ptr, loglik, specimens=None, shared_prevalence: bool = False):
        n, T = run.n_samples, run.n_pools
        read = run.pool_read
        specimens = np.arange(n) if specimens is None else np.asarray(specimens, dtype=np.int64)
        owner = np.repeat(np.arange(T, dtype=np.int64), run.pool_size)
        keep = read[owner]
        # first read pool of each specimen, for the sweep order
        first = np.full(n, T, dtype=np.int64)
        np.minimum.at(first, run.pool_members[keep], owner[keep])
        order = specimens[np.argsort(first[specimens], kind="stable")]
        new = np.full(n, -1, dtype=np.int64)
        new[order] = np.arange(len(order))
        members = new[run.pool_members]
        mine = keep & (members >= 0)
        s_ptr, s_pools = csr(members[mine], owner[mine].astype(np.int32), len(order))
        ll = np.where(np.isfinite(loglik), loglik, -PENALTY)
        delta = np.zeros_like(ll)
        delta[:-1] = ll[1:] - ll[:-1]
        delta[lik_ptr[1:] - 1] = 0.0  # the last entry of each pool has no successor
        prior = run.prior[order]
        base = np.zeros(len(order)) if shared_prevalence else np.log(prior) - np.log1p(-prior)
        swap = np.flatnonzero(read & (run.n_positive > 0) & (run.pool_size >= 2))
        swap = swap[new[run.pool_members[run.pool_ptr[swap]]] >= 0]
        pos_member = np.zeros(len(order), dtype=bool)
        hit = (run.n_positive > 0)[owner] & (members >= 0)
        pos_member[members[hit]] = True
        return cls(order, run.pool_ptr.astype(np.int64), members.astype(np.int32), s_ptr, s_pools,
                   lik_ptr.astype(np.int64), ll, delta, base, swap.astype(np.int32), read,
                   pos_member)

    @property
    def n_sampled(self) -> int:
        return len(self.order)

    @property
    def n_pools(self) -> int:
        return len(self.pool_ptr) - 1

    def pool_counts(self, x: np.ndarray) -> np.ndarray:
        """Positive sampled members d_t of every pool for statuses x (uint8, m)."""
        owner = np.repeat(np.arange(self.n_pools), np.diff(self.pool_ptr))
        mine = self.pool_members >= 0
        return np.bincount(owner[mine], weights=x[self.pool_members[mine]],
                           minlength=self.n_pools).astype(np.int32)

    def violations(self, x: np.ndarray) -> np.ndarray:
        """Read pools whose likelihood is zero at x (hard constraints broken)."""
        d = self.pool_counts(x)
        t = np.flatnonzero(self.read)
        return t[self.loglik[self.lik_ptr[t] + d[t]] <= -PENALTY]
