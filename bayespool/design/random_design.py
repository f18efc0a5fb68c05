"""Random designs: every specimen in ``w`` distinct pools, pool sizes as even as possible.

The ``n * w`` memberships are dealt from a stream of random permutations of the pools, ``w`` at a time
to each specimen in turn. Each permutation hands every pool one membership, so pool sizes differ by
at most one; where a specimen's ``w`` slots straddle two permutations, the head of the new one is drawn
from the pools the specimen is not yet in, so its pools are distinct. Random designs with constant
column weight are the standard non-adaptive benchmark in group testing (Aldridge, Johnson & Scarlett
2019, Group Testing: An Information-Theoretic Perspective, Foundations and Trends in Communications
and Information Theory 15(3-4)). Their disjunctness is measured, not promised: the largest overlap
``lam`` of two specimens gives ``floor((w - 1) / lam)``.

Two specimens in the identical set of pools could never be told apart by any readouts, so the
dealt memberships are repaired by swaps between specimens (which keep every pool's size) until each
specimen has a set of its own; when there are fewer distinct sets than specimens (C(T, w) < n) the
design is refused.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..validation import check_count, check_seed
from .base import Design, build_design, check_max_pool_size, pool_labels
from .specimens import specimens


REDEALS = 5  # fresh deals tried before a nearly saturated design is refused


def deal_memberships(n: int, w: int, pools: int, rng: np.random.Generator) -> np.ndarray:
    """(n, w) distinct pool indices per specimen, every pool dealt floor or ceil of n*w/pools."""
    total = n * w
    stream = np.empty(total, dtype=np.int64)
    pos = 0
    while pos < total:
        perm = rng.permutation(pools)
        offset = pos % w  # slots of the current specimen already dealt
        if offset:
            taken = stream[pos - offset:pos]
            free = ~np.isin(perm, taken)
            need = w - offset
            head = perm[free][:need]
            rest = np.concatenate([perm[~free], perm[free][need:]])
            perm = np.concatenate([head, rng.permutation(rest)])
        take = min(pools, total - pos)
        stream[pos:pos + take] = perm[:take]
        pos += take
    return stream.reshape(n, w)


def separate_identical(table: np.ndarray, rng: np.random.Generator, attempts: int = 200) -> bool:
    """Swap pools between specimens until no two rows of ``table`` (n, w) hold the same set.

    A swap exchanges pool ``a`` of specimen i for pool ``b`` of specimen j, so pool sizes stay as
    dealt; it is taken only when both new sets are distinct pools and no other specimen's set.
    ``attempts`` random swaps are tried per crowded specimen, then every swap in turn. Returns
    False if some specimen has no such swap.
    """
    n, w = table.shape
    sets = [frozenset(row) for row in table.tolist()]
    count: dict = {}
    for key in sets:
        count[key] = count.get(key, 0) + 1

    def swap(i: int, j: int, a: int, b: int) -> bool:
        pa, pb = int(table[i, a]), int(table[j, b])
        if j == i or pa == pb or pb in sets[i] or pa in sets[j]:
            return False
        new_i, new_j = (sets[i] - {pa}) | {pb}, (sets[j] - {pb}) | {pa}
        if count.get(new_i, 0) or count.get(new_j, 0):
            return False
        for old in (sets[i], sets[j]):
            count[old] -= 1
        table[i, a], table[j, b] = pb, pa
        sets[i], sets[j] = new_i, new_j
        count[new_i] = count.get(new_i, 0) + 1
        count[new_j] = count.get(new_j, 0) + 1
        return True

    for i in [i for i in range(n) if count[sets[i]] > 1]:
        if count[sets[i]] == 1:  # its twin moved away already
            continue
        if any(swap(i, int(rng.integers(n)), int(rng.integers(w)), int(rng.integers(w)))
               for _ in range(attempts)):
            continue
        if not any(swap(i, j, a, b) for j in rng.permutation(n).tolist()
                   for a in range(w) for b in range(w)):
            return False
    return True


def random_design(samples, pools_per_sample: int = 2, pools: int | None = None,
                  max_pool_size: int | None = None, seed=None) -> Design:
    """Every specimen in ``pools_per_sample`` distinct pools out of ``pools``.

    Without ``pools`` the fewest pools that keep every pool within ``max_pool_size`` are used.
    """
    spec = specimens(samples)
    n = len(spec)
    w = check_count(pools_per_sample, "pools_per_sample")
    limit = check_max_pool_size(max_pool_size)
    if pools is None:
        if limit is None:
            raise InputError("the random design needs pools or max_pool_size",
                             parameters=("pools", "max_pool_size"))
        pools = max(w, math.ceil(n * w / limit))
    t = check_count(pools, "pools")
    if w > t:
        raise InputError(f"pools_per_sample {w} exceeds the number of pools ({t})",
                         parameters=("pools_per_sample",))
    if limit is not None and math.ceil(n * w / t) > limit:
        raise InputError(f"{n} specimens in {w} pools each need at least "
                         f"{math.ceil(n * w / limit)} pools of at most {limit} (got pools {t})",
                         parameters=("pools",))
    if math.comb(t, w) < n:
        raise InputError(f"{n} specimens cannot each have a set of pools of their own: {t} pools "
                         f"give only {math.comb(t, w)} distinct sets of {w}, and two specimens in "
                         "the same pools can never be told apart; raise `pools` or "
                         "`pools_per_sample`")
    rng = check_seed(seed)
    for _ in range(REDEALS):
        table = deal_memberships(n, w, t, rng)
        if separate_identical(table, rng):
            break
    else:
        raise InputError(f"found no layout that gives each of the {n} specimens its own set of "
                         f"{w} pools out of {t} (nearly every set is needed); raise `pools` or "
                         "`pools_per_sample`")
    owner = table.ravel()
    member = np.repeat(np.arange(n, dtype=np.int32), w)
    order = np.argsort(owner, kind="stable")
    ptr = np.zeros(t + 1, dtype=np.int64)
    np.cumsum(np.bincount(owner, minlength=t), out=ptr[1:])
    notes = []
    if (np.diff(ptr) == 0).any():
        notes.append(f"{int((np.diff(ptr) == 0).sum())} of the {t} pools received no specimen "
                     "and are left out")
    params = {"pools_per_sample": w, "pools": t}
    if seed is not None:
        params["seed"] = seed
    return build_design("random", spec.ids, pool_labels("P", t), ptr, member[order],
                        parameters=params, notes=notes, compute_overlap=True, max_pool_size=limit)
