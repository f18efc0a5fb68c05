"""Numba kernels that read two ID columns of a plain CSV file straight into integer codes.

Used by :func:`bayespool.io.read_id_table` for large files that are plain (ASCII, no quotes, no
whitespace but the newline ending each line and the separator: comma, semicolon or tab), where they
give what pandas' reader followed by ``pd.factorize`` gives, without making a Python string per cell: codes in order of first
appearance, and each distinct ID once. Anything else (a quote, a row with a different number of
fields, ...) is left to pandas, which knows the full CSV dialect and reports errors.
"""
from __future__ import annotations

import numpy as np
from numba import njit

_NEWLINE = 10
_FNV_OFFSET, _FNV_PRIME = np.uint64(14695981039346656037), np.uint64(1099511628211)
_MIX1, _MIX2 = np.uint64(0xFF51AFD7ED558CCD), np.uint64(0xC4CEB9FE1A85EC53)


@njit(cache=True)
def split_fields(raw, start, delimiter, n_fields, col_a, col_b, a_start, a_end, b_start, b_end):
    """Byte ranges of columns ``col_a`` and ``col_b`` of every data line from ``start``, fields
    separated by the byte ``delimiter``; blank lines are skipped (as pandas does). Returns the number of rows, or -1 when some line does not
    have ``n_fields`` fields."""
    n = len(raw)
    pos = start
    rows = 0
    while pos < n:
        if raw[pos] == _NEWLINE:
            pos += 1
            continue
        field = 0
        begin = pos
        while True:
            at_end = pos >= n or raw[pos] == _NEWLINE
            if at_end or raw[pos] == delimiter:
                if field == col_a:
                    a_start[rows] = begin
                    a_end[rows] = pos
                if field == col_b:
                    b_start[rows] = begin
                    b_end[rows] = pos
                field += 1
                if at_end:
                    break
                begin = pos + 1
            pos += 1
        if field != n_fields:
            return -1
        rows += 1
        pos += 1
    return rows


@njit(cache=True)
def _hash(raw, s, e):
    """FNV-1a over the bytes, then the 64-bit finaliser of MurmurHash3 so that the low bits used
    for the slot depend on every byte (FNV's low bits alone cluster on IDs like S0000001...)."""
    h = _FNV_OFFSET
    for a in range(s, e):
        h = (h ^ np.uint64(raw[a])) * _FNV_PRIME
    h ^= h >> np.uint64(33)
    h *= _MIX1
    h ^= h >> np.uint64(33)
    h *= _MIX2
    h ^= h >> np.uint64(33)
    return h


@njit(cache=True)
def _insert(table, mask, h, uid, off):
    slot = h & mask
    while table[3 * slot + 1] >= 0:
        slot = (slot + np.uint64(1)) & mask
    table[3 * slot] = np.int64(h)
    table[3 * slot + 1] = uid
    table[3 * slot + 2] = off


@njit(cache=True)
def factorize_ranges(raw, starts, ends, rows, codes):
    """Codes (first appearance order) of the byte strings raw[starts[r]:ends[r]], r < rows.

    Open addressing on a 64-bit hash; a slot holds the hash, the code and where the ID's bytes
    start in a compact copy of the distinct IDs (each followed by a newline), so a lookup touches
    one slot and, when the hashes agree, those bytes. Returns that copy, in code order.
    """
    size = 1 << 16
    table = np.full(3 * size, -1, dtype=np.int64)
    mask = np.uint64(size - 1)
    total = 0
    for r in range(rows):
        total += ends[r] - starts[r] + 1
    ubuf = np.empty(total, dtype=np.uint8)
    uhash = np.empty(rows, dtype=np.uint64)
    uoff = np.empty(rows, dtype=np.int64)
    used = 0
    n_unique = 0
    for r in range(rows):
        s, e = starts[r], ends[r]
        n = e - s
        h = _hash(raw, s, e)
        slot = h & mask
        found = -1
        while True:
            u = table[3 * slot + 1]
            if u < 0:
                break
            if table[3 * slot] == np.int64(h):
                o = table[3 * slot + 2]
                same = ubuf[o + n] == _NEWLINE if o + n < used else False
                a = 0
                while same and a < n:
                    same = ubuf[o + a] == raw[s + a]
                    a += 1
                if same:
                    found = u
                    break
            slot = (slot + np.uint64(1)) & mask
        if found >= 0:
            codes[r] = found
            continue
        codes[r] = n_unique
        for a in range(n):
            ubuf[used + a] = raw[s + a]
        ubuf[used + n] = _NEWLINE
        uhash[n_unique] = h
        uoff[n_unique] = used
        table[3 * slot] = np.int64(h)
        table[3 * slot + 1] = n_unique
        table[3 * slot + 2] = used
        used += n + 1
        n_unique += 1
        if 2 * n_unique > size:  # keep the load below one half
            size *= 2
            table = np.full(3 * size, -1, dtype=np.int64)
            mask = np.uint64(size - 1)
            for v in range(n_unique):
                _insert(table, mask, uhash[v], v, uoff[v])
    return ubuf[:used]
