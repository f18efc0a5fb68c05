"""Connected components of the sample-pool graph.

Only pools with at least one readout join samples: an unread pool carries no information, so it must
not glue components together. Components are decoded independently (exact, BP or Gibbs per component).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from ..csr import CSR, CSRPart
from ..run import Run


@dataclass(frozen=True)
class Components:
    """Samples and read pools grouped by component; ``sample_label[i]`` is i's component.

    ``members`` and ``read_pools`` are :class:`~bayespool.csr.CSR` rows per component (int32
    sample and pool indices); ``sample_ptr``/``samples`` and ``pool_ptr``/``pools`` are their
    arrays, as the kernels take them.
    """

    sample_label: np.ndarray  # int32 (n_samples,)
    members: CSR
    read_pools: CSR

    sample_ptr = CSRPart("members", "ptr")
    samples = CSRPart("members", "indices")
    pool_ptr = CSRPart("read_pools", "ptr")
    pools = CSRPart("read_pools", "indices")

    @property
    def n_components(self) -> int:
        return len(self.members)

    sizes = CSRPart("members", "sizes")  # samples per component

    def samples_of(self, c: int) -> np.ndarray:
        return self.members.row(c)

    def pools_of(self, c: int) -> np.ndarray:
        return self.read_pools.row(c)


@njit(cache=True)
def _union_find_labels(pool_ptr, pool_members, read, n_samples):
    """Component label of every sample, numbered by first appearance (union-find with halving)."""
    parent = np.arange(n_samples)
    for t in range(len(pool_ptr) - 1):
        if not read[t] or pool_ptr[t + 1] == pool_ptr[t]:
            continue
        a = pool_members[pool_ptr[t]]
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        for j in range(pool_ptr[t] + 1, pool_ptr[t + 1]):
            b = pool_members[j]
            while parent[b] != b:
                parent[b] = parent[parent[b]]
                b = parent[b]
            if a != b:
                if a < b:
                    parent[b] = a
                else:
                    parent[a] = b
                    a = b
    label = np.full(n_samples, -1, dtype=np.int32)
    root_label = np.full(n_samples, -1, dtype=np.int32)
    n_comp = 0
    for i in range(n_samples):
        r = i
        while parent[r] != r:
            r = parent[r]
        if root_label[r] < 0:
            root_label[r] = n_comp
            n_comp += 1
        label[i] = root_label[r]
    return label, n_comp


def components(run: Run) -> Components:
    """Connected components of samples linked through read pools (numbered by first appearance)."""
    n = run.n_samples
    read = run.pool_read
    sample_label, n_comp = _union_find_labels(run.pool_ptr, run.pool_members, read, n)
    members = CSR.from_pairs(sample_label, np.arange(n, dtype=np.int32), n_comp)
    read_idx = np.flatnonzero(read)
    # a read pool's component is that of any member
    pool_label = sample_label[run.pool_members[run.pool_ptr[read_idx]]]
    return Components(sample_label, members,
                      CSR.from_pairs(pool_label, read_idx.astype(np.int32), n_comp))
