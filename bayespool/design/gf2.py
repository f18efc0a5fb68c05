"""Binary polynomials and the field GF(2^m), as far as cyclic codes need them.

A binary polynomial is a Python int whose bit ``i`` is the coefficient of ``x^i``. The field GF(2^m)
is built from a primitive polynomial found by search (the smallest one of degree m whose root ``x``
has multiplicative order ``2^m - 1``), so no table of polynomials is recalled. Minimal polynomials of
powers of a primitive element come from their cyclotomic cosets (MacWilliams & Sloane 1977, The
Theory of Error-Correcting Codes, ch. 4 and 7).
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np

_BYTE_WEIGHT = np.array([bin(b).count("1") for b in range(256)], dtype=np.uint8)


def popcount(words: np.ndarray) -> np.ndarray:
    """Number of set bits of each uint64 (a byte table, so any numpy version works)."""
    w = np.ascontiguousarray(words, dtype=np.uint64)
    return _BYTE_WEIGHT[w.view(np.uint8)].reshape(w.shape + (8,)).sum(axis=-1, dtype=np.int64)


def degree(p: int) -> int:
    return p.bit_length() - 1


def mul(a: int, b: int) -> int:
    """Product of two binary polynomials."""
    out = 0
    while b:
        if b & 1:
            out ^= a
        a <<= 1
        b >>= 1
    return out


def mod(a: int, p: int) -> int:
    """Remainder of ``a`` divided by ``p``."""
    dp = degree(p)
    while a and degree(a) >= dp:
        a ^= p << (degree(a) - dp)
    return a


def _pow_x(e: int, p: int) -> int:
    """x^e mod p by repeated squaring."""
    result, base = 1, mod(2, p)
    while e:
        if e & 1:
            result = mod(mul(result, base), p)
        base = mod(mul(base, base), p)
        e >>= 1
    return result


def _prime_factors(n: int) -> list[int]:
    out, f = [], 2
    while f * f <= n:
        if n % f == 0:
            out.append(f)
            while n % f == 0:
                n //= f
        f += 1
    if n > 1:
        out.append(n)
    return out


def is_primitive(p: int) -> bool:
    """True when ``x`` has order exactly ``2^m - 1`` modulo ``p`` (degree m, constant term 1)."""
    m = degree(p)
    if m < 1 or not p & 1:
        return False
    order = (1 << m) - 1
    if _pow_x(order, p) != 1:
        return False
    return all(_pow_x(order // q, p) != 1 for q in _prime_factors(order))


@lru_cache(maxsize=None)
def primitive_polynomial(m: int) -> int:
    """The numerically smallest primitive binary polynomial of degree ``m``."""
    for p in range((1 << m) | 1, 1 << (m + 1), 2):
        if is_primitive(p):
            return p
    raise ValueError(f"no primitive polynomial of degree {m}")  # pragma: no cover


@lru_cache(maxsize=None)
def field_tables(m: int) -> tuple[np.ndarray, np.ndarray]:
    """(exp, log) tables of GF(2^m): ``exp[i] = alpha^i`` as an m-bit int, ``log`` its inverse."""
    p = primitive_polynomial(m)
    order = (1 << m) - 1
    exp = np.zeros(2 * order, dtype=np.int64)
    log = np.full(1 << m, -1, dtype=np.int64)
    v = 1
    for i in range(order):
        exp[i] = exp[i + order] = v
        log[v] = i
        v <<= 1
        if v >> m:
            v ^= p
    return exp, log


def cyclotomic_coset(i: int, m: int) -> list[int]:
    """{i 2^j mod (2^m - 1)}: the exponents of alpha^i's conjugates."""
    order = (1 << m) - 1
    out, c = [], i % order
    while c not in out:
        out.append(c)
        c = (2 * c) % order
    return out


def minimal_polynomial(i: int, m: int) -> int:
    """The binary minimal polynomial of alpha^i: the product of (x + alpha^c) over its coset."""
    exp, log = field_tables(m)
    coeffs = [1]  # GF(2^m) coefficients, lowest degree first
    for c in cyclotomic_coset(i, m):
        root = int(exp[c])
        nxt = [0] * (len(coeffs) + 1)
        for d, a in enumerate(coeffs):
            nxt[d + 1] ^= a                       # a * x
            if a:                                 # a * root
                nxt[d] ^= int(exp[log[a] + log[root]])
        coeffs = nxt
    if any(a not in (0, 1) for a in coeffs):  # pragma: no cover - a property of the field
        raise ArithmeticError("minimal polynomial with coefficients outside GF(2)")
    return sum(a << d for d, a in enumerate(coeffs))


def bch_generator(m: int, t: int) -> int:
    """Generator of the narrow-sense primitive binary BCH code of length 2^m - 1 and designed
    distance 2t + 1: the least common multiple of the minimal polynomials of alpha^1..alpha^2t
    (Bose & Ray-Chaudhuri 1960; Hocquenghem 1959). t = 1 gives the cyclic Hamming code."""
    order = (1 << m) - 1
    seen, g = set(), 1
    for i in range(1, 2 * t + 1):
        rep = min(cyclotomic_coset(i, m))
        if rep in seen or i % order == 0:
            continue
        seen.add(rep)
        g = mul(g, minimal_polynomial(i, m))
    return g


def poly_text(p: int) -> str:
    """``x^4 + x + 1`` for 0b10011."""
    terms = []
    for d in range(degree(p), -1, -1):
        if p >> d & 1:
            terms.append("1" if d == 0 else "x" if d == 1 else f"x^{d}")
    return " + ".join(terms) if terms else "0"
