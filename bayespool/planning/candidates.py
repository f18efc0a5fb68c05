"""Candidate next tests: the pools the greedy batch chooses among.

Four kinds, each a plain way a laboratory follows up pooled results:
- ``retest``: an undecided specimen tested alone;
- ``pool``: undecided specimens of similar probability pooled together (sorted by probability, cut
  into consecutive chunks for a ladder of pool sizes, so that information picks the size), across
  the whole run and within each linked group of specimens;
- ``split``: the undecided members of a pool that read positive, whole and in halves (binary
  splitting, Hwang 1972, JASA 67);
- ``replicate``: one more reading of an existing pool that has undecided members (the same mix, so
  it draws no more specimen material);
- ``code``: the undecided members of a positive pool (4 to 64 of them) laid out as codewords of a
  single-error-correcting code (:func:`bayespool.design.code.code_design`): about log2 k + 3 pools
  that name a lone positive in one round despite a wrong readout. Each of its pools is a candidate
  scored by information like any other, so the batch takes as many of them as are worth it.
Identical member sets are kept once (the cheapest kind first). Pools are CSR arrays (ptr, members).
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..csr import CSR

KINDS = ("retest", "pool", "split", "replicate", "code")
RETEST, POOL, SPLIT, REPLICATE, CODE = range(5)
CODE_SIZES = (4, 64)   # positive pools whose undecided members get a code follow-up
LADDER = (2, 3, 4, 5, 6, 8, 10, 12, 14, 16, 20, 24, 28, 32, 40, 48, 64, 96, 128)


@dataclass(frozen=True)
class Candidates:
    """Candidate pools (``pools``: int64 specimen indices per candidate), with their kind and the
    read pool they follow up (or -1)."""

    pools: CSR
    kind: np.ndarray       # int8 codes into KINDS
    source: np.ndarray     # int64 read pool a split or replicate follows up, else -1

    def __len__(self) -> int:
        return len(self.pools)

    def members_of(self, c: int) -> np.ndarray:
        return self.pools.row(c)

    def uses_material(self) -> np.ndarray:
        """True where reading the candidate draws specimen material (all but replicates)."""
        return self.kind != REPLICATE


@lru_cache(maxsize=None)
def code_pools(k: int) -> tuple:
    """Member positions (0..k-1) of each pool of the code design for ``k`` specimens."""
    from ..design.code import code_design
    d = code_design(k)
    return tuple(np.sort(d.members(t).astype(np.int64)) for t in range(d.n_pools))


def pool_sizes(max_pool_size: int, allowed) -> list[int]:
    """The ladder of pool sizes up to ``max_pool_size`` that the assay covers (``allowed[k]``)."""
    sizes = [k for k in LADDER if k < max_pool_size] + [max_pool_size]
    return [k for k in sizes if k >= 2 and k < len(allowed) and allowed[k]]


def _chunks(order: np.ndarray, sizes, out: list, kind: int):
    for k in sizes:
        if k > len(order):
            continue
        for start in range(0, len(order) - k + 1, k):
            out.append((kind, -1, order[start:start + k]))


def generate(run, probability: np.ndarray, undecided: np.ndarray, comps, max_pool_size: int,
             allowed: np.ndarray) -> Candidates:
    """Candidates for the undecided specimens (indices) of ``run``; ``allowed[k]`` says whether the
    assay covers pool size k."""
    und = np.zeros(run.n_samples, dtype=bool)
    und[undecided] = True
    sizes = pool_sizes(max_pool_size, allowed)
    items: list = []
    # replicates of read pools with an undecided member
    read = run.pool_read
    for t in np.flatnonzero(read):
        mem = run.members(t)
        k = len(mem)
        if k < len(allowed) and allowed[k] and und[mem].any():
            items.append((REPLICATE, int(t), np.sort(mem.astype(np.int64))))
    if allowed[1]:
        for i in undecided:
            items.append((RETEST, -1, np.array([i], dtype=np.int64)))
    # splits of positive pools
    for t in np.flatnonzero(run.n_positive > 0):
        mem = run.members(t).astype(np.int64)
        left = mem[und[mem]]
        u = len(left)
        if u >= 2:
            if u < len(mem) and u <= max_pool_size:
                items.append((SPLIT, int(t), left))
            half = (u + 1) // 2
            for part in (left[:half], left[half:]):
                if 2 <= len(part) <= max_pool_size:
                    items.append((SPLIT, int(t), part))
    # code follow-ups of positive pools
    for t in np.flatnonzero(run.n_positive > 0):
        mem = run.members(t).astype(np.int64)
        left = mem[und[mem]]
        if CODE_SIZES[0] <= len(left) <= CODE_SIZES[1]:
            for pool in code_pools(len(left)):
                if len(pool) <= max_pool_size and len(pool) < len(allowed) and allowed[len(pool)]:
                    items.append((CODE, int(t), left[pool]))
    # probability-grouped pools: the whole run, then each linked group
    order = undecided[np.argsort(probability[undecided], kind="stable")].astype(np.int64)
    _chunks(order, sizes, items, POOL)
    labels = comps.sample_label[order]
    by_group = np.argsort(labels, kind="stable")
    bounds = np.flatnonzero(np.diff(labels[by_group])) + 1
    for part in np.split(order[by_group], bounds):
        if 2 < len(part):
            _chunks(part, [k for k in sizes if k < len(part)], items, POOL)
            if len(part) <= max_pool_size and allowed[len(part)]:
                items.append((POOL, -1, part))
    # keep each member set once, the first (cheapest) kind
    seen = set()
    kind, source, chunks = [], [], []
    for code, src, mem in items:
        key = tuple(sorted(mem.tolist()))
        if key in seen:
            continue
        seen.add(key)
        kind.append(code)
        source.append(src)
        chunks.append(mem)
    return Candidates(CSR.from_rows(chunks), np.array(kind, dtype=np.int8),
                      np.array(source, dtype=np.int64))
