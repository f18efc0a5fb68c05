"""Dorfman blocks: consecutive specimens in pools of ``k`` (the last block may be smaller).

The first stage of Dorfman's two-stage procedure (Dorfman 1943, The detection of defective members of
large populations, Annals of Mathematical Statistics 14(4)): every specimen is in exactly one pool, so
a positive pool says only that one of its members is positive; follow-up tests sort it out.
"""
from __future__ import annotations

import numpy as np

from ..errors import InputError
from .base import Design, build_design, check_count, check_max_pool_size, pool_labels
from .specimens import specimens


def dorfman_blocks(n: int, k: int):
    """CSR (ptr, members) of consecutive blocks of ``k`` among ``n`` specimens."""
    ptr = np.minimum(np.arange(0, n + k, k, dtype=np.int64), n)
    ptr = ptr[: int(np.ceil(n / k)) + 1]
    return ptr, np.arange(n, dtype=np.int32)


def dorfman_design(samples, pool_size: int, max_pool_size: int | None = None,
                   fill: str | None = None) -> Design:
    """Pools of ``pool_size`` consecutive specimens in the given order.

    Specimens with plates and wells are pooled in pipetting order instead, ``fill`` ``columns``
    (default) or ``rows`` (:func:`bayespool.design.plate_layout.plate_dorfman_design`).
    """
    spec = specimens(samples)
    k = check_count(pool_size, "--pool-size")
    limit = check_max_pool_size(max_pool_size)
    pos = spec.positions()
    if pos is not None:
        from .plate_layout import plate_dorfman_design
        return plate_dorfman_design(spec, pos, k, fill or "columns", limit)
    if fill is not None:
        raise InputError("--fill needs a samples file with plate and well columns")
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
