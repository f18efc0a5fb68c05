"""Kautz-Singleton designs: specimens as codewords of a Reed-Solomon code over GF(q), q prime.

Specimen ``i`` gets the message ``(a_0, ..., a_{m-1})``, the base-q digits of ``i``; its codeword is
the polynomial ``a_0 + a_1 x + ... + a_{m-1} x^{m-1}`` evaluated at the ``L <= q`` points
``x = 0, 1, ..., L - 1`` of GF(q). Position ``j`` of the codeword picks one pool out of the ``q`` pools
of block ``j``. So there are ``L * q`` pools, up to ``q^m`` specimens, every specimen in ``L`` pools;
two distinct polynomials of degree below ``m`` agree at most at ``m - 1`` points, so two specimens
share at most ``m - 1`` pools and the design is d-disjunct for ``d <= (L - 1) / (m - 1)``
(Kautz & Singleton 1964, Nonrandom binary superimposed codes, IEEE Transactions on Information Theory
10(4)). Because the lowest digit ``a_0`` cycles fastest, the pools of each block differ in size by at
most one specimen.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..validation import check_count, parameter_error
from .base import Design, build_design, check_max_pool_size, guaranteed_disjunct
from .specimens import specimens


def is_prime(q: int) -> bool:
    if q < 2:
        return False
    if q < 4:
        return True
    if q % 2 == 0:
        return False
    return all(q % f for f in range(3, math.isqrt(q) + 1, 2))


def next_prime(q: int) -> int:
    """Smallest prime >= q."""
    q = max(int(q), 2)
    while not is_prime(q):
        q += 1
    return q


@dataclass(frozen=True)
class CodeParameters:
    """Field size q (prime), code length L <= q and dimension m."""

    q: int
    length: int
    dimension: int

    @property
    def pools(self) -> int:
        return self.q * self.length

    @property
    def capacity(self) -> int:
        return self.q ** self.dimension

    @property
    def disjunct(self) -> int | None:
        """Guaranteed d, or None when any number of positives is separable (m = 1)."""
        if self.dimension == 1:
            return None
        return (self.length - 1) // (self.dimension - 1)


def _ceil_root(n: int, m: int) -> int:
    r = max(1, int(round(n ** (1.0 / m))))
    while r ** m < n:
        r += 1
    while r > 1 and (r - 1) ** m >= n:
        r -= 1
    return r


def choose_parameters(n: int, positives: int, max_pool_size: int | None = None) -> CodeParameters:
    """The (q, L, m) with the fewest pools that covers ``n`` specimens and is ``positives``-disjunct.

    For each dimension m >= 2 the shortest length is ``L = d (m - 1) + 1``; q is the smallest prime
    with ``q >= L``, ``q^m >= n`` and pools of at most ``max_pool_size`` (about ``n / q`` each).
    m = 1 (a pool per specimen, i.e. individual testing) is the fallback when nothing smaller exists.
    Ties go to the larger q (smaller pools, less dilution).
    """
    d = positives
    best = None
    floor_q = 1 if max_pool_size is None else math.ceil(n / max_pool_size)
    m = 2
    while True:
        length = d * (m - 1) + 1
        q = next_prime(max(length, _ceil_root(n, m), floor_q, 2))
        cand = CodeParameters(q, length, m)
        pools = _effective_pools(n, cand)
        if best is None or (pools, -q) < (_effective_pools(n, best), -best.q):
            best = cand
        if _ceil_root(n, m) <= 2 or m > 64:
            break
        m += 1
    identity = CodeParameters(next_prime(n), 1, 1)
    if best is None or _effective_pools(n, identity) <= _effective_pools(n, best):
        best = identity
    return best


def _effective_pools(n: int, p: CodeParameters) -> int:
    """Pools that receive a specimen: all L*q once n >= q, else L*n."""
    return p.length * min(p.q, n)


def codewords(n: int, params: CodeParameters) -> np.ndarray:
    """(n, L) symbols in GF(q) of the first n messages (message i = base-q digits of i)."""
    q, L, m = params.q, params.length, params.dimension
    digits = (np.arange(n, dtype=np.int64)[:, None] // (q ** np.arange(m, dtype=np.int64))) % q
    x = np.arange(L, dtype=np.int64)
    powers = np.ones((L, m), dtype=np.int64)
    for i in range(1, m):
        powers[:, i] = (powers[:, i - 1] * x) % q
    out = np.zeros((n, L), dtype=np.int64)
    for i in range(m):  # Horner-free sum, reduced at each step so nothing overflows
        out = (out + digits[:, i:i + 1] * powers[None, :, i]) % q
    return out


def kautz_singleton_design(samples, positives: int | None = None, q: int | None = None,
                           length: int | None = None, dimension: int | None = None,
                           max_pool_size: int | None = None) -> Design:
    """Kautz-Singleton design for the given specimens.

    Give ``positives`` (the number d of positives the design must single out without test error)
    and let the parameters be chosen, or give ``q`` (prime) and ``dimension`` (and optionally
    ``length``, default q).
    """
    spec = specimens(samples)
    n = len(spec)
    limit = check_max_pool_size(max_pool_size)
    if q is None and dimension is None and length is None:
        if positives is None:
            raise parameter_error("the kautz-singleton design needs positives (or q and "
                                  "dimension)", "positives", "q", "dimension")
        d = check_count(positives, "positives")
        params = choose_parameters(n, d, limit)
    else:
        if q is None or dimension is None:
            raise parameter_error("give both q and dimension (or only positives)", "q",
                                  "dimension", "positives")
        q = check_count(q, "q", 2)
        if not is_prime(q):
            raise parameter_error(f"q must be a prime (GF(q) is built as integers mod q), got {q}",
                                  "q")
        m = check_count(dimension, "dimension")
        L = q if length is None else check_count(length, "length")
        if L > q:
            raise parameter_error(f"length {L} exceeds q = {q}: a Reed-Solomon code over GF(q) "
                                  "has at most q evaluation points", "length")
        params = CodeParameters(q, L, m)
        if params.capacity < n:
            raise InputError(f"q^m = {q}^{m} = {params.capacity} codewords cannot cover {n} "
                             "specimens; raise q or dimension", parameters=("q", "dimension"))
        if positives is not None and params.disjunct is not None:
            d = check_count(positives, "positives")
            if d > params.disjunct:
                raise InputError(f"q = {q}, length {L}, dimension {m} guarantees only "
                                 f"{params.disjunct}-disjunct, fewer than positives {d}",
                                 parameters=("positives",))
    words = codewords(n, params)
    qq, L = params.q, params.length
    owner = (np.arange(L, dtype=np.int64)[None, :] * qq + words).ravel()
    member = np.repeat(np.arange(n, dtype=np.int32), L)
    order = np.argsort(owner, kind="stable")
    ptr = np.zeros(L * qq + 1, dtype=np.int64)
    np.cumsum(np.bincount(owner, minlength=L * qq), out=ptr[1:])
    wb, wv = len(str(L)), len(str(qq - 1))
    labels = np.array([f"K{j + 1:0{wb}d}-{v:0{wv}d}" for j in range(L) for v in range(qq)],
                      dtype=object)
    notes = []
    if params.dimension == 1:
        notes.append("dimension 1: every specimen has pools of its own (individual testing); "
                     "no pooled design of this kind is smaller for that many positives")
    overlap = 0 if params.dimension == 1 or n < 2 else min(params.dimension - 1, L)
    disjunct = (guaranteed_disjunct(0, L, n) if params.dimension == 1
                else min(params.disjunct, max(n - 1, 0)))
    return build_design("kautz-singleton", spec.ids, labels, ptr, member[order],
                        parameters={"q": qq, "length": L, "dimension": params.dimension},
                        notes=notes, overlap=overlap, disjunct=disjunct, max_pool_size=limit)
