"""The batch: candidates picked greedily, each scored given what the earlier picks will tell.

Each pick maximises the conditional information I(Y_c; x | Y_B) = H(Y_B, Y_c) - H(Y_B) - E_x H(Y_c |
x) given the batch B chosen so far, so two tests that would tell the same thing are not both taken.
Because that information is monotone submodular (see :mod:`.information`), a candidate's gain can
only fall as the batch grows; the lazy greedy method (Minoux 1978, Accelerated greedy algorithms for
maximizing submodular set functions) re-scores a candidate only when it reaches the top of the queue
with a stale score, and the greedy batch is within 1 - 1/e of the best batch of its size (Nemhauser,
Wolsey & Fisher 1978).

Specimens linked through read pools (decoding components) are independent a posteriori; the tests of
the batch join them into groups, and only the tests within a group need a joint outcome table.
Limits are checked when a candidate reaches the top: specimen material left, the size of the linked
group that reading it would make by joining groups (the decoder's enumeration limit; tests within
one existing group are always allowed), and tests per group.
"""
from __future__ import annotations

import heapq
from dataclasses import dataclass

import numpy as np
from numba import njit

from .information import (combine, conditional_entropy, entropy_with, extend, outcome_entropy,
                          readout_probabilities, single_information)

MAX_GROUP_TESTS = 10  # tests of one batch within one linked group (outcome table 2^10 x draws)
_EPS = 1e-9


@dataclass
class Batch:
    """Candidates chosen, in pick order, with what each was expected to tell at its pick."""

    chosen: np.ndarray         # candidate indices
    gain: np.ndarray           # bits, conditional on the earlier picks
    positive_probability: np.ndarray
    total_information: float  # joint information of the whole batch (bits)
    stop: str                  # why the batch ended: "full", "information", "candidates"


@njit(cache=True)
def linked_sizes(ptr, members, label, comp_size):
    """Per candidate, the number of specimens in the components its members belong to, and the
    number of those components."""
    n_cand = len(ptr) - 1
    out = np.zeros(n_cand, dtype=np.int64)
    n_comp = np.zeros(n_cand, dtype=np.int64)
    mark = np.zeros(len(comp_size), dtype=np.int64)
    for c in range(n_cand):
        s = 0
        for a in range(ptr[c], ptr[c + 1]):
            g = label[members[a]]
            if mark[g] != c + 1:
                mark[g] = c + 1
                s += comp_size[g]
                n_comp[c] += 1
        out[c] = s
    return out, n_comp


class _Groups:
    """Union-find over components, with the joint outcome table of the batch's tests in each."""

    def __init__(self, comp_size: np.ndarray):
        n = len(comp_size)
        self.parent = np.arange(n)
        self.size = np.asarray(comp_size, dtype=np.int64).copy()
        self.tests = np.zeros(n, dtype=np.int64)
        self.changed = np.zeros(n, dtype=np.int64)
        self.table: dict = {}
        self.entropy: dict = {}
        self.cond: dict = {}

    def find(self, g: int) -> int:
        parent = self.parent
        while parent[g] != g:
            parent[g] = parent[parent[g]]
            g = parent[g]
        return int(g)

    def roots(self, labels) -> list:
        return sorted({self.find(int(g)) for g in np.unique(labels)})

    def joint(self, roots, n_draws, w):
        """Outcome table and entropy of the tests already chosen in these groups."""
        tabs = [r for r in roots if r in self.table]
        if not tabs:
            return np.ones((1, n_draws)), 0.0
        if len(tabs) == 1:
            return self.table[tabs[0]], self.entropy[tabs[0]]
        lik = self.table[tabs[0]]
        for r in tabs[1:]:
            lik = combine(lik, self.table[r])
        return lik, float(outcome_entropy(lik, w))

    def merge(self, roots, table, entropy, cond, stamp) -> None:
        new = roots[0]
        for r in roots[1:]:
            self.parent[r] = new
            self.size[new] += self.size[r]
            self.tests[new] += self.tests[r]
        for r in roots:
            self.table.pop(r, None)
            self.entropy.pop(r, None)
            cond += self.cond.pop(r, 0.0)
        self.tests[new] += 1
        self.table[new], self.entropy[new], self.cond[new] = table, entropy, cond
        self.changed[new] = stamp

    def total_information(self) -> float:
        return float(sum(self.entropy[r] - self.cond[r] for r in self.table))


def _drawn(pool_volume: float, members: np.ndarray) -> float:
    """Microlitres of each member that an equal-volume pool takes."""
    return pool_volume / len(members)


def select_batch(xt, w, cands, label, comp_size, qtab, n_tests: int, draws_left: np.ndarray,
                 max_linked: int, min_information: float = 0.0,
                 relative_information: float = 0.0, replicates_use_material: bool = False,
                 volume_left: np.ndarray | None = None, pool_volume: float = 0.0) -> Batch:
    """Pick up to ``n_tests`` candidates greedily by conditional information.

    ``xt`` specimens x draws (uint8), ``w`` draw weights, ``label``/``comp_size`` the decoding
    components, ``draws_left`` how many more times each specimen may be drawn (changed in place);
    ``volume_left`` (microlitres, changed in place, or None) with ``pool_volume``: a pool of k
    members built by equal-volume transfers draws ``pool_volume / k`` of each.
    The batch stops early when the best remaining gain is below ``min_information`` bits or below
    ``relative_information`` times the first pick's gain.
    """
    n_draws = xt.shape[1]
    ptr, members = cands.pools.ptr, cands.pools.indices
    p0, g0 = single_information(xt, w, ptr, members, qtab)
    linked, n_linked = linked_sizes(ptr, members, label, comp_size)
    material = cands.uses_material() | replicates_use_material
    ok = (g0 > _EPS) & ((linked <= max_linked) | (n_linked == 1))
    heap = [(-float(g0[c]), int(c)) for c in np.flatnonzero(ok)]
    heapq.heapify(heap)
    stamp = np.zeros(len(cands), dtype=np.int64)
    groups = _Groups(comp_size)
    chosen, gains, probs = [], [], []
    q = np.empty(n_draws)
    cutoff = max(min_information, _EPS)
    stop = "candidates"
    while heap:
        if len(chosen) >= n_tests:
            stop = "full"
            break
        bound, c = heap[0]
        if -bound < cutoff:
            stop = "information"
            break
        heapq.heappop(heap)
        mem = cands.members_of(c)
        if material[c] and ((draws_left[mem] < 1).any() or (
                volume_left is not None and (volume_left[mem] < _drawn(pool_volume, mem) - 1e-9).any())):
            continue
        roots = groups.roots(label[mem])
        if ((len(roots) > 1 and groups.size[roots].sum() > max_linked)
                or groups.tests[roots].sum() >= MAX_GROUP_TESTS):
            continue
        readout_probabilities(xt, mem, qtab, q)
        fresh = groups.changed[roots].max() <= stamp[c]
        lik, h_b = groups.joint(roots, n_draws, w)
        h_bt = float(entropy_with(lik, w, q))
        hc = float(conditional_entropy(q, w))
        gain = h_bt - h_b - hc
        if not (fresh or not heap or gain >= -heap[0][0]):
            stamp[c] = len(chosen)
            if gain > _EPS:
                heapq.heappush(heap, (-gain, c))
            continue
        if gain < cutoff:  # the best remaining test tells too little
            stop = "information"
            break
        chosen.append(c)
        gains.append(gain)
        probs.append(float(np.dot(w, q)))
        if len(chosen) == 1:
            cutoff = max(cutoff, relative_information * gain)
        groups.merge(roots, extend(lik, q), h_bt, hc, len(chosen))
        if material[c]:
            draws_left[mem] -= 1
            if volume_left is not None:
                volume_left[mem] -= _drawn(pool_volume, mem)
    else:
        stop = "full" if len(chosen) >= n_tests else "candidates"
    return Batch(np.array(chosen, dtype=np.int64), np.array(gains), np.array(probs),
                 groups.total_information(), stop)
