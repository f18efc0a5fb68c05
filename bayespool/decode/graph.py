"""Connected components of the sample-pool graph.

Only pools with at least one readout join samples: an unread pool carries no information, so it must
not glue components together. Components are decoded independently (exact, BP or Gibbs per component).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from ..run import Run, csr


@dataclass(frozen=True)
class Components:
    """Samples and read pools grouped by component, as CSR; ``sample_label[i]`` is i's component."""

    sample_label: np.ndarray  # int32 (n_samples,)
    sample_ptr: np.ndarray    # int64 (n_components + 1,)
    samples: np.ndarray       # int32, sample indices grouped by component
    pool_ptr: np.ndarray      # int64 (n_components + 1,)
    pools: np.ndarray         # int32, read pool indices grouped by component

    @property
    def n_components(self) -> int:
        return len(self.sample_ptr) - 1

    @property
    def sizes(self) -> np.ndarray:
        return np.diff(self.sample_ptr)

    def samples_of(self, c: int) -> np.ndarray:
        return self.samples[self.sample_ptr[c]:self.sample_ptr[c + 1]]

    def pools_of(self, c: int) -> np.ndarray:
        return self.pools[self.pool_ptr[c]:self.pool_ptr[c + 1]]


def read_pools(run: Run) -> np.ndarray:
    """Boolean mask of pools with at least one readout."""
    return (run.n_positive + run.n_negative) > 0


def components(run: Run) -> Components:
    """Connected components of samples linked through read pools."""
    n, T = run.n_samples, run.n_pools
    read = read_pools(run)
    owner = np.repeat(np.arange(T, dtype=np.int64), run.pool_size)
    keep = read[owner]
    rows = run.pool_members[keep].astype(np.int64)
    cols = n + owner[keep]
    graph = coo_matrix((np.ones(len(rows), dtype=np.int8), (rows, cols)), shape=(n + T, n + T))
    _, labels = connected_components(graph, directed=False)
    # renumber so that component ids follow samples' first appearance
    s_lab = labels[:n]
    uniq, first = np.unique(s_lab, return_index=True)
    order = np.argsort(first, kind="stable")
    remap = np.empty(labels.max() + 1 if len(labels) else 0, dtype=np.int64)
    remap[uniq[order]] = np.arange(len(uniq))
    sample_label = remap[s_lab].astype(np.int32)
    n_comp = len(uniq)
    sptr, samples = csr(sample_label.astype(np.int64), np.arange(n, dtype=np.int32), n_comp)
    read_idx = np.flatnonzero(read)
    # a read pool's component is that of any member
    pool_label = sample_label[run.pool_members[run.pool_ptr[read_idx]]].astype(np.int64)
    pptr, pools = csr(pool_label, read_idx.astype(np.int32), n_comp)
    return Components(sample_label, sptr, samples, pptr, pools)
