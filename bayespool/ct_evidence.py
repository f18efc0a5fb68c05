"""Ct readouts as evidence: per-pool sufficient statistics and likelihood vectors L_t[d].

A pool's readouts under a ``[ct]`` assay reduce to a few numbers (:class:`PoolCtStats`): the count,
sum and sum of squares of its Ct readouts, their range, the readouts without amplification and those
that amplified with no Ct value. Replicates of one pool share its noiseless Ct, so L_t[d] is the
integral over the effective individual Ct of d independent positives (:meth:`CtModel.effective_ct`)
of the product of the replicates' factors, not a product of per-readout probabilities.

That integral is exact for a pool on its own; it treats the Cts of the d positives as drawn afresh
for every pool, so a decoder that multiplies such vectors across pools (belief propagation, the
binary enumerator) ignores that a specimen's Ct is shared by its pools. :mod:`bayespool.decoders.ct_exact`
integrates the shared Cts jointly.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .ct import _logsumexp

CHUNK = 1 << 21  # pools x grid nodes evaluated at once


@dataclass(eq=False)
class PoolCtStats:
    """Per-pool readout statistics: Ct readouts (``n_ct``, ``sum_ct``, ``sum_ct2``, ``ct_min``,
    ``ct_max``), readouts without amplification (``n_none``) and amplified ones with no Ct value
    (``n_unknown``)."""

    n_ct: np.ndarray
    sum_ct: np.ndarray
    sum_ct2: np.ndarray
    ct_min: np.ndarray
    ct_max: np.ndarray
    n_none: np.ndarray
    n_unknown: np.ndarray
    notes: list = field(default_factory=list)

    @classmethod
    def binary(cls, n_positive, n_negative) -> "PoolCtStats":
        """Readouts with no Ct value: a positive readout amplified, Ct unknown."""
        pos = np.asarray(n_positive, dtype=float)
        z = np.zeros(len(pos))
        return cls(z, z, z, np.full(len(pos), np.inf), np.full(len(pos), -np.inf),
                   np.asarray(n_negative, dtype=float), pos)

    @classmethod
    def from_readouts(cls, n_pools: int, pool, result, ct, cutoff: float) -> "PoolCtStats":
        """Classify readouts (pool index, 1/0 result, Ct or NaN) under a cutoff (see the issue's
        reading rules in :func:`ct_notes`)."""
        pool = np.asarray(pool, dtype=np.int64)
        result = np.asarray(result, dtype=np.int64)
        ct = np.asarray(ct, dtype=float)
        has = np.isfinite(ct)
        late = has & (ct >= cutoff)
        neg_with_ct = has & ~late & (result == 0)
        is_ct = has & ~late & (result == 1)
        unknown = ~has & (result == 1)
        none = ~(is_ct | unknown)

        def count(mask, weights=None):
            return np.bincount(pool[mask], weights=None if weights is None else weights[mask],
                               minlength=n_pools).astype(float)
        ct_min = np.full(n_pools, np.inf)
        ct_max = np.full(n_pools, -np.inf)
        np.minimum.at(ct_min, pool[is_ct], ct[is_ct])
        np.maximum.at(ct_max, pool[is_ct], ct[is_ct])
        notes = []
        if late.any():
            notes.append(f"{int(late.sum())} readout(s) with a Ct at or above the cutoff "
                         f"({cutoff:g}) read as no amplification")
        if neg_with_ct.any():
            notes.append(f"{int(neg_with_ct.sum())} negative readout(s) carry a Ct below the "
                         "cutoff: kept as negative, their Ct ignored")
        return cls(count(is_ct), count(is_ct, ct), count(is_ct, ct * ct), ct_min, ct_max,
                   count(none), count(unknown), notes)

    @classmethod
    def from_run(cls, run, model) -> "PoolCtStats":
        """The run's readouts under a Ct model (binary readouts when the file had no ``ct``)."""
        frame = run.readout_ct
        if frame is None:
            return cls.binary(run.n_positive, run.n_negative)
        return cls.from_readouts(run.n_pools, frame["pool"].to_numpy(),
                                 frame["result"].to_numpy(), frame["ct"].to_numpy(), model.cutoff)

    def take(self, index) -> "PoolCtStats":
        return PoolCtStats(*(getattr(self, f)[index] for f in
                             ("n_ct", "sum_ct", "sum_ct2", "ct_min", "ct_max", "n_none",
                              "n_unknown")))


def ct_notes(run, assay) -> list[str]:
    """What decode says about the ``ct`` column: readouts the Ct model reads otherwise than their
    result word, or Ct values that a binary assay ignores."""
    frame = run.readout_ct
    if assay.ct is None and (frame is None
                             or not np.isfinite(frame["ct"].to_numpy(dtype=float)).any()):
        return []
    if assay.ct is None:
        n = int(np.isfinite(frame["ct"].to_numpy(dtype=float)).sum())
        return [f"{n} readout(s) carry a Ct but the assay has no [ct] table: read as "
                "positive/negative only"]
    return PoolCtStats.from_run(run, assay.ct).notes


def pool_log_likelihood(assay, pool_size, stats: PoolCtStats):
    """Flat per-pool log L_t[d], d = 0..k_t, as ``(ptr, values)`` (the layout of
    :meth:`bayespool.assay.Assay.log_likelihood`), integrated over independent individual Cts.

    Pools without Ct readouts share their vector with every pool of the same size and counts, so a
    large run costs one integral per distinct pattern plus one per pool that has Ct readouts.
    """
    model = assay.ct
    k = np.asarray(pool_size, dtype=np.int64)
    ptr = np.zeros(len(k) + 1, dtype=np.int64)
    np.cumsum(k + 1, out=ptr[1:])
    values = np.zeros(int(ptr[-1]))
    read = (stats.n_ct + stats.n_none + stats.n_unknown) > 0
    with_ct = np.flatnonzero(read & (stats.n_ct > 0))
    plain = np.flatnonzero(read & (stats.n_ct == 0))
    if len(plain):
        key = np.stack([k[plain], stats.n_none[plain], stats.n_unknown[plain]], axis=1)
        uniq, inverse = np.unique(key, axis=0, return_inverse=True)
        inverse = np.asarray(inverse).ravel()
        z = np.zeros(len(uniq))
        rows = PoolCtStats(z, z, z, np.full(len(uniq), np.inf), np.full(len(uniq), -np.inf),
                           uniq[:, 1], uniq[:, 2])
        vectors = _vectors(model, assay.specificity, uniq[:, 0].astype(np.int64), rows)
        for r, t in zip(inverse, plain):
            values[ptr[t]:ptr[t + 1]] = vectors[r]
    if len(with_ct):
        vectors = _vectors(model, assay.specificity, k[with_ct], stats.take(with_ct))
        for v, t in zip(vectors, with_ct):
            values[ptr[t]:ptr[t + 1]] = v
    return ptr, values


def _vectors(model, specificity, k, stats: PoolCtStats) -> list:
    """log L[0..k_r] for every row r (rows are pools or patterns of pools)."""
    out = [np.empty(int(kk) + 1) for kk in k]
    neg = model.log_negative_pool(specificity, stats.n_ct, stats.ct_min, stats.ct_max,
                                  stats.n_none, stats.n_unknown)
    for r in range(len(k)):
        out[r][0] = neg[r]
    for size in np.unique(k):
        rows = np.flatnonzero(k == size)
        shift = float(model.pool_shift(size))
        for d in range(1, int(size) + 1):
            nodes, mass = model.effective_ct(d)
            log_mass = np.log(mass)
            step = max(1, CHUNK // len(nodes))
            for a in range(0, len(rows), step):
                sel = rows[a:a + step]
                f = model.log_readout_factor(
                    nodes[None, :] + shift, stats.n_ct[sel, None], stats.sum_ct[sel, None],
                    stats.sum_ct2[sel, None], stats.n_none[sel, None],
                    stats.n_unknown[sel, None])
                res = _logsumexp(f + log_mass[None, :], axis=1)
                for r, v in zip(sel, res):
                    out[r][d] = v
    return out
