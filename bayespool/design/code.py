"""Designs from binary error-correcting codes: each specimen's pools are a codeword.

Specimen ``i`` gets a distinct nonzero codeword ``c_i`` of a binary linear code of length ``n`` and
joins pool ``j`` where ``c_i`` has a 1. With one positive specimen and no test error the readouts are
its codeword; with ``e`` wrong readouts they are that codeword with ``e`` bits flipped. If every two
words of the design (the all-zero word, "nobody positive", included) differ in at least ``delta``
places, the nearest word is still the right one for ``e <= floor((delta - 1) / 2)``: minimum-distance
decoding, which for a linear code is syndrome decoding (MacWilliams & Sloane 1977, The Theory of
Error-Correcting Codes, ch. 1). Several positives are left to the Bayesian decoders, as for any layout.

The codes are cyclic, built from a generator polynomial g(x) of degree r: the binary Hamming code
(g a primitive polynomial of degree m: [2^m - 1, 2^m - 1 - m, 3]), the narrow-sense primitive BCH
codes (g the least common multiple of the minimal polynomials of alpha..alpha^2t, designed distance
2t + 1; Bose & Ray-Chaudhuri 1960, Hocquenghem 1959), each optionally extended by an overall parity
bit (Hamming [2^m, 2^m - 1 - m, 4]) and shortened to dimension k' (the multiples m(x) g(x) with
deg m < k', length r + k'; shortening never lowers the distance). Codes are enumerated (2^k' words), so
k' is at most :data:`MAX_DIMENSION`; the distance printed is measured on the enumerated words, not
only the designed bound.

Codewords of one weight are preferred, so every specimen is in as many pools (diluted alike); among
the words of that weight those that even out the pool sizes are taken first.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from . import gf2
from ..validation import check_count
from .base import Design, build_design, check_max_pool_size, pool_labels
from .specimens import specimens

MAX_DIMENSION = 20          # 2^20 codewords enumerated at most
MAX_LENGTH = 64             # codewords are uint64 bit masks
CONSTANT_WEIGHT_SLACK = 2   # extra pools accepted to give every specimen the same weight
FAMILIES = ("hamming", "extended-hamming", "bch", "extended-bch")


@dataclass(frozen=True)
class BinaryCode:
    """A (shortened, possibly extended) cyclic binary code given by its generator polynomial."""

    family: str            # one of FAMILIES
    m: int                 # the field GF(2^m); full length 2^m - 1
    t: int                 # designed to correct t errors (distance 2t + 1; +1 if extended)
    dimension: int         # k' (after shortening)
    generator_polynomial: int
    _cache: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def extended(self) -> bool:
        return self.family.startswith("extended")

    @property
    def full_length(self) -> int:
        return (1 << self.m) - 1 + self.extended

    @property
    def full_dimension(self) -> int:
        return (1 << self.m) - 1 - gf2.degree(self.generator_polynomial)

    @property
    def length(self) -> int:
        return gf2.degree(self.generator_polynomial) + self.dimension + self.extended

    @property
    def shortened_by(self) -> int:
        return self.full_dimension - self.dimension

    @property
    def designed_distance(self) -> int:
        return 2 * self.t + 1 + self.extended

    def generator_rows(self) -> np.ndarray:
        """The k' generator rows x^i g(x) (plus the parity bit when extended) as uint64 masks."""
        rows = []
        for i in range(self.dimension):
            word = self.generator_polynomial << i
            if self.extended and bin(word).count("1") % 2:
                word |= 1 << (self.length - 1)
            rows.append(word)
        return np.array(rows, dtype=np.uint64)

    def generator_matrix(self) -> np.ndarray:
        """(k', n) 0/1 matrix whose row space is the code."""
        rows = self.generator_rows()
        return ((rows[:, None] >> np.arange(self.length, dtype=np.uint64)[None, :]) & 1).astype(
            np.uint8)

    def codewords(self) -> np.ndarray:
        """All 2^k' codewords (uint64 masks; message order, word 0 is the zero word)."""
        if "words" not in self._cache:
            if self.dimension > MAX_DIMENSION:
                raise InputError(f"a code of dimension {self.dimension} has too many codewords to "
                                 f"enumerate (at most 2^{MAX_DIMENSION})")
            words = np.zeros(1, dtype=np.uint64)
            for row in self.generator_rows():
                words = np.concatenate([words, words ^ row])
            self._cache["words"] = words
        return self._cache["words"]

    def weights(self) -> np.ndarray:
        return gf2.popcount(self.codewords())

    def minimum_distance(self) -> int:
        """Smallest weight of a nonzero codeword (= minimum distance of a linear code), measured."""
        w = self.weights()[1:]
        return int(w.min()) if len(w) else 0

    def name(self) -> str:
        base = {"hamming": "Hamming", "extended-hamming": "extended Hamming",
                "bch": f"BCH (t = {self.t})", "extended-bch": f"extended BCH (t = {self.t})"}
        short = "shortened " if self.shortened_by else ""
        return f"{short}{base[self.family]}"

    def describe(self) -> str:
        """``shortened Hamming code [9, 5, 3], g(x) = x^4 + x + 1``."""
        d = (str(self.minimum_distance()) if self.dimension <= MAX_DIMENSION
             else f">= {self.designed_distance} (designed)")
        return (f"{self.name()} code [{self.length}, {self.dimension}, {d}], g(x) = {gf2.poly_text(self.generator_polynomial)}"
                + (", plus an overall parity bit" if self.extended else ""))


def make_code(family: str, m: int, dimension: int | None = None, t: int | None = None
              ) -> BinaryCode:
    """The code of ``family`` over GF(2^m), shortened to ``dimension`` (default: full)."""
    if family not in FAMILIES:
        raise InputError(f"unknown code family {family!r} (choose one of {', '.join(FAMILIES)})")
    t = 1 if family.endswith("hamming") else (2 if t is None else t)
    g = gf2.bch_generator(m, t)
    full_k = (1 << m) - 1 - gf2.degree(g)
    k = full_k if dimension is None else dimension
    if not 1 <= k <= full_k:
        raise InputError(f"the {family} code over GF(2^{m}) has dimension {full_k}; cannot "
                         f"shorten it to {k}")
    return BinaryCode(family, m, t, k, g)


def _families_for(errors: int, family: str | None) -> list[tuple[str, int]]:
    if family is None:
        return [("hamming", 1), ("extended-hamming", 1)] if errors == 1 else [("bch", errors)]
    if family in ("hamming", "extended-hamming") and errors > 1:
        raise InputError(f"a {family} code corrects one wrong readout; ask for `code` 'bch' to "
                         f"tolerate {errors}")
    return [(family, 1 if family.endswith("hamming") else errors)]


def candidate_codes(n_words: int, errors: int = 1, family: str | None = None):
    """Codes with at least ``n_words`` nonzero codewords that correct ``errors``, shortest first."""
    need = max(1, math.ceil(math.log2(n_words + 1)))
    out = []
    for fam, t in _families_for(errors, family):
        for m in range(2, 7):
            g = gf2.bch_generator(m, t)
            full_k = (1 << m) - 1 - gf2.degree(g)
            for k in range(need, min(full_k, MAX_DIMENSION) + 1):
                code = BinaryCode(fam, m, t, k, g)
                if code.length <= MAX_LENGTH:
                    out.append(code)
    out.sort(key=lambda c: (c.length, c.extended, c.m, c.dimension))
    return out


def balanced_pick(words: np.ndarray, n: int, length: int) -> np.ndarray:
    """``n`` of ``words`` chosen greedily so the pools' loads stay even (first words on ties)."""
    if n >= len(words):
        return words[:n]
    if n * len(words) * length > 5e7:
        return words[:n]
    bits = ((words[:, None] >> np.arange(length, dtype=np.uint64)[None, :]) & 1).astype(np.int64)
    load = np.zeros(length, dtype=np.int64)
    free = np.ones(len(words), dtype=bool)
    chosen = []
    for _ in range(n):
        score = bits @ load
        score[~free] = np.iinfo(np.int64).max
        j = int(np.argmin(score))
        chosen.append(j)
        free[j] = False
        load += bits[j]
    return words[np.sort(np.array(chosen))]


@dataclass(frozen=True)
class CodeChoice:
    code: BinaryCode
    words: np.ndarray      # uint64 masks, one per specimen
    constant_weight: bool
    note: str | None = None


def choose_words(n: int, errors: int = 1, family: str | None = None,
                 max_pool_size: int | None = None) -> CodeChoice:
    """The shortest code giving ``n`` distinct nonzero words, of one weight when that costs at most
    :data:`CONSTANT_WEIGHT_SLACK` more pools; words of the lightest weights otherwise."""
    codes = candidate_codes(n, errors, family)
    if not codes:
        raise InputError(f"no code of length at most {MAX_LENGTH} and dimension at most "
                         f"{MAX_DIMENSION} gives {n} codewords correcting {errors} error(s)")
    shortest = codes[0].length
    for code in codes:
        if code.length > shortest + CONSTANT_WEIGHT_SLACK:
            break
        w = code.weights()
        words = code.codewords()
        for weight in np.unique(w[w > 0]):
            pick = words[w == weight]
            if len(pick) >= n:
                chosen = balanced_pick(pick, n, code.length)
                if _fits(chosen, code.length, max_pool_size):
                    return CodeChoice(code, chosen, True)
    code = codes[0]
    w = code.weights()
    order = np.argsort(np.where(w > 0, w, np.iinfo(np.int64).max), kind="stable")[:n]
    chosen = code.codewords()[np.sort(order)]
    note = (f"no code within {CONSTANT_WEIGHT_SLACK} pools of the shortest has {n} codewords of "
            "one weight: specimens are in different numbers of pools (lightest words first)")
    if not _fits(chosen, code.length, max_pool_size):
        raise InputError(f"a code design for {n} specimens makes pools larger than "
                         f"`max_pool_size` {max_pool_size}; use fewer specimens per design")
    return CodeChoice(code, chosen, False, note)


def _fits(words: np.ndarray, length: int, max_pool_size: int | None) -> bool:
    if max_pool_size is None:
        return True
    bits = (words[:, None] >> np.arange(length, dtype=np.uint64)[None, :]) & 1
    return int(bits.sum(axis=0).max()) <= max_pool_size


def words_distance(words: np.ndarray) -> int:
    """Smallest Hamming distance among ``words`` and the zero word (pairwise, brute force)."""
    w = np.concatenate([np.zeros(1, dtype=np.uint64), np.asarray(words, dtype=np.uint64)])
    best = MAX_LENGTH + 1
    for i in range(len(w) - 1):
        best = min(best, int(gf2.popcount(w[i + 1:] ^ w[i]).min()))
    return best


def design_words(design: Design) -> np.ndarray:
    """Each specimen's pattern of pools as a uint64 mask (bit j = pool j); at most 64 pools."""
    if design.n_pools > MAX_LENGTH:
        raise InputError(f"patterns of {design.n_pools} pools do not fit a 64-bit word")
    owner = np.repeat(np.arange(design.n_pools, dtype=np.uint64), design.pool_size)
    words = np.zeros(design.n_samples, dtype=np.uint64)
    np.bitwise_or.at(words, design.pool_members, np.left_shift(np.uint64(1), owner))
    return words


@dataclass(frozen=True)
class SingleCall:
    """Minimum-distance reading of one round: the specimen whose word is nearest (-1: none)."""

    specimen: int
    distance: int           # readouts that disagree with that word
    unique: bool            # no other word (or "none") is as near


def nearest_specimen(design: Design, positive_pools) -> SingleCall:
    """Decode a round assuming at most one positive: the word nearest to the readouts."""
    from .disjunct import pool_mask
    mask = pool_mask(design, positive_pools)
    y = np.uint64(int(np.sum(np.left_shift(np.uint64(1),
                                           np.flatnonzero(mask).astype(np.uint64)))))
    words = np.concatenate([np.zeros(1, dtype=np.uint64), design_words(design)])
    dist = gf2.popcount(words ^ y)
    best = int(dist.min())
    hits = np.flatnonzero(dist == best)
    return SingleCall(int(hits[0]) - 1, best, len(hits) == 1)


def code_design(samples, errors: int = 1, code: str | None = None,
                max_pool_size: int | None = None) -> Design:
    """Each specimen a distinct nonzero codeword of a code correcting ``errors`` wrong readouts.

    ``code``: ``hamming``, ``extended-hamming``, ``bch`` or ``extended-bch`` (default: Hamming
    or extended Hamming for one error, BCH for more), shortened to the fewest pools.
    """
    spec = specimens(samples)
    n = len(spec)
    e = check_count(errors, "errors")
    limit = check_max_pool_size(max_pool_size)
    choice = choose_words(n, e, code, limit)
    c = choice.code
    bits = ((choice.words[:, None] >> np.arange(c.length, dtype=np.uint64)[None, :]) & 1
            ).astype(bool)
    owner_sample = np.nonzero(bits)          # (specimen, pool) pairs, row-major
    order = np.argsort(owner_sample[1], kind="stable")
    members = owner_sample[0][order].astype(np.int32)
    ptr = np.zeros(c.length + 1, dtype=np.int64)
    np.cumsum(np.bincount(owner_sample[1], minlength=c.length), out=ptr[1:])
    delta = words_distance(choice.words) if n <= 4096 else c.minimum_distance()
    tolerated = (delta - 1) // 2
    weights = np.unique(bits.sum(axis=1))
    params = {"code": c.describe(), "length": c.length, "dimension": c.dimension,
              "code_distance": c.minimum_distance(), "design_distance": delta,
              "errors_tolerated": tolerated,
              "weight": int(weights[0]) if len(weights) == 1 else
              f"{int(weights.min())} to {int(weights.max())}"}
    notes = [f"with one positive, its codeword is read back; the nearest word still names it "
             f"with up to {tolerated} wrong readout{'s' if tolerated != 1 else ''} "
             f"(words differ in at least {delta} pools, the empty pattern included)"]
    if (delta - 1) % 2 == 1:
        notes.append(f"with one positive, {tolerated + 1} wrong readouts are detected (no word is that near) but "
                     "not corrected")
    if choice.note:
        notes.append(choice.note)
    if (np.diff(ptr) == 0).any():
        notes.append(f"{int((np.diff(ptr) == 0).sum())} position(s) of the code hold no "
                     "specimen and are left out")
    return build_design("code", spec.ids, pool_labels("E", c.length), ptr, members,
                        parameters=params, notes=notes, compute_overlap=True,
                        max_pool_size=limit)
