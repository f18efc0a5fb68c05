"""Random designs: every specimen in ``w`` distinct pools, pool sizes as even as possible.

The ``n * w`` memberships are dealt from a stream of random permutations of the pools, ``w`` at a time
to each specimen in turn. Each permutation hands every pool one membership, so pool sizes differ by
at most one; where a specimen's ``w`` slots straddle two permutations, the head of the new one is drawn
from the pools the specimen is not yet in, so its pools are distinct. Random designs with constant
column weight are the standard non-adaptive benchmark in group testing (Aldridge, Johnson & Scarlett
2019, Group Testing: An Information-Theoretic Perspective, Foundations and Trends in Communications
and Information Theory 15(3-4)). Their disjunctness is measured, not promised: the largest overlap
``lam`` of two specimens gives ``floor((w - 1) / lam)``.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..validation import check_count, check_seed
from .base import Design, build_design, check_max_pool_size, pool_labels
from .specimens import specimens


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
    rng = check_seed(seed)
    table = deal_memberships(n, w, t, rng)
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
