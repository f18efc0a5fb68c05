"""Dorfman blocks: consecutive specimens in pools of ``k`` (the last block may be smaller).

The first stage of Dorfman's two-stage procedure (Dorfman 1943, The detection of defective members of
large populations, Annals of Mathematical Statistics 14(4)): every specimen is in exactly one pool, so
a positive pool says only that one of its members is positive; follow-up tests sort it out.
"""
from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..validation import check_count
from .base import Design, build_design, check_max_pool_size, pool_labels
from .specimens import specimens


def dorfman_blocks(n: int, k: int):
    """CSR (ptr, members) of consecutive blocks of ``k`` among ``n`` specimens."""
    ptr = np.minimum(np.arange(0, n + k, k, dtype=np.int64), n)
    ptr = ptr[: int(np.ceil(n / k)) + 1]
    return ptr, np.arange(n, dtype=np.int32)


def dorfman_design(samples, pool_size: int | None = None, max_pool_size: int | None = None,
                   fill: str | None = None, by_risk: bool = False) -> Design:
    """Pools of ``pool_size`` consecutive specimens in the given order.

    Specimens with plates and wells are pooled in pipetting order instead, ``fill`` ``columns``
    (default) or ``rows`` (:func:`bayespool.design.plate_layout.plate_dorfman_design`).
    ``by_risk`` pools specimens of similar prior together (:mod:`.informative`).
    """
    spec = specimens(samples)
    if by_risk:
        return _informative(spec, pool_size, max_pool_size)
    k = check_count(pool_size, "pool_size")
    limit = check_max_pool_size(max_pool_size)
    pos = spec.positions()
    if pos is not None:
        from .plate_layout import plate_dorfman_design
        return plate_dorfman_design(spec, pos, k, fill or "columns", limit)
    if fill is not None:
        raise InputError("`fill` needs a samples file with plate and well columns")
    n = len(spec)
    ptr, members = dorfman_blocks(n, k)
    notes = []
    if n % k:
        notes.append(f"the last pool holds {n % k} specimen{'s' if n % k > 1 else ''}")
    return build_design("dorfman", spec.ids, pool_labels("D", len(ptr) - 1), ptr, members,
                        parameters={"pool_size": k}, notes=notes,
                        overlap=1 if k > 1 and n > 1 else 0,
                        disjunct=0 if k > 1 and n > 1 else max(n - 1, 0),
                        max_pool_size=limit)


def _informative(spec, pool_size, max_pool_size) -> Design:
    """Informative Dorfman (McMahan, Tebbs & Bilder 2012): sorted by risk, then cut into blocks
    of ``pool_size`` or, without one, where the expected number of tests is least."""
    from .informative import optimal_blocks, risk_order
    order = risk_order(spec.prior, spec.source)
    limit = check_max_pool_size(max_pool_size)
    p = spec.prior[order]
    n = len(order)
    notes = ["specimens pooled by ascending risk (informative Dorfman)"]
    if pool_size is not None:
        k = check_count(pool_size, "pool_size")
        ptr, _ = dorfman_blocks(n, k)
        parameters = {"pool_size": k, "by_risk": True}
    else:
        if limit is None:
            raise InputError("`by_risk` without `pool_size` chooses pool sizes up to "
                             "`max_pool_size`: give one of them")
        ptr = optimal_blocks(p, limit)
        sizes = np.diff(ptr)
        parameters = {"pool_size": "by risk", "by_risk": True}
        notes.append(f"pool sizes {int(sizes.min())} to {int(sizes.max())} chosen for the fewest "
                     "expected tests under an error-free test (pool-specific optimal Dorfman)")
    exp = float(sum((1.0 if b - a == 1 else 1.0 + (b - a) * (1 - np.prod(1 - p[a:b])))
                    for a, b in zip(ptr[:-1], ptr[1:])))
    notes.append(f"expected tests per specimen {exp / n:.4f} under an error-free test "
                 "(Dorfman 1943 with each specimen's risk)")
    return build_design("dorfman", spec.ids, pool_labels("D", len(ptr) - 1), ptr,
                        order.astype(np.int32), parameters=parameters, notes=notes,
                        overlap=1 if n > 1 else 0, disjunct=0, max_pool_size=limit)
