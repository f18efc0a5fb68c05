"""Pooling designs: structure, Kautz-Singleton disjunctness by brute force, noiseless decoding."""
from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.design import (array_design, dorfman_design, kautz_singleton_design, make_design,
                              noiseless_decode, pool_results, random_design)
from bayespool.design.kautz_singleton import choose_parameters, is_prime
from bayespool.errors import InputError
from bayespool.simulation import protocol

PERFECT = Assay(1.0, ConstantSensitivity(1.0))


def incidence(design) -> np.ndarray:
    """Dense pools x specimens matrix, for brute-force checks on small designs only."""
    m = np.zeros((design.n_pools, design.n_samples), dtype=bool)
    owner = np.repeat(np.arange(design.n_pools), design.pool_size)
    m[owner, design.pool_members] = True
    return m


def bitmasks(m: np.ndarray) -> np.ndarray:
    """Each specimen's pools as an int64 bit mask (at most 63 pools)."""
    assert m.shape[0] <= 63
    return (m.astype(np.int64) << np.arange(m.shape[0], dtype=np.int64)[:, None]).sum(axis=0)


def is_disjunct_brute_force(m: np.ndarray, d: int) -> bool:
    """d-disjunct: no specimen's pools are all covered by the union of d other specimens' pools
    (the definition in Kautz & Singleton 1964), checked over every choice of d others."""
    bits = bitmasks(m)
    n = m.shape[1]
    for j in range(n):
        others = np.delete(np.arange(n), j)
        combos = np.array(list(itertools.combinations(others, d)), dtype=np.int64)
        union = np.bitwise_or.reduce(bits[combos], axis=1)
        if np.any((bits[j] & ~union) == 0):
            return False
    return True


# ---- Kautz-Singleton (Kautz & Singleton 1964): d-disjunct for d <= (L - 1)/(m - 1)
@pytest.mark.parametrize("q,m,length,n", [(3, 2, 3, 9), (5, 2, 5, 25), (5, 3, 5, 125),
                                          (7, 2, 4, 49), (5, 2, 5, 18)])
def test_kautz_singleton_is_d_disjunct_by_brute_force(q, m, length, n):
    design = kautz_singleton_design(n, q=q, dimension=m, length=length)
    d = (length - 1) // (m - 1)  # Kautz & Singleton 1964
    assert design.properties.disjunct == d
    assert design.properties.pools_per_sample_min == design.properties.pools_per_sample_max == length
    assert is_disjunct_brute_force(incidence(design), d)


@pytest.mark.parametrize("q", [3, 5])
def test_kautz_singleton_bound_is_tight_for_full_codes(q):
    # Negative control for the checker: the full q^2 code with L = q is not (d + 1)-disjunct.
    design = kautz_singleton_design(q * q, q=q, dimension=2)
    assert not is_disjunct_brute_force(incidence(design), design.properties.disjunct + 1)


def test_disjunct_checker_rejects_dorfman_blocks():
    # A Dorfman block of two cannot tell its members apart: not even 1-disjunct (by definition).
    assert not is_disjunct_brute_force(incidence(dorfman_design(6, 2)), 1)


def test_kautz_singleton_structure():
    q, m, length = 7, 2, 5
    design = kautz_singleton_design(40, q=q, dimension=m, length=length)
    mat = incidence(design)
    # every specimen has one pool in each block of q pools
    blocks = mat.reshape(length, q, -1).sum(axis=1)
    assert np.all(blocks == 1)
    # two codewords agree in at most m - 1 positions: overlaps below m (Reed-Solomon distance)
    gram = mat.T.astype(int) @ mat.astype(int)
    np.fill_diagonal(gram, 0)
    assert gram.max() <= m - 1 == design.properties.max_overlap
    # pool sizes within a block differ by at most one
    sizes = design.pool_size
    assert sizes.max() - sizes.min() <= 1
    assert len(set(map(tuple, mat.T.tolist()))) == 40  # distinct codewords
    ptr, pools = design.sample_pools()
    for i in (0, 17, 39):
        assert sorted(pools[ptr[i]:ptr[i + 1]].tolist()) == np.flatnonzero(mat[:, i]).tolist()


def _subsets(n, d):
    for size in range(d + 1):
        yield from itertools.combinations(range(n), size)


@pytest.mark.parametrize("q,m,length", [(3, 2, 3), (5, 2, 5)])
def test_noiseless_decoding_finds_every_positive_up_to_d(q, m, length):
    design = kautz_singleton_design(q ** m, q=q, dimension=m, length=length)
    d = design.properties.disjunct
    rng = np.random.default_rng(1)
    for positives in _subsets(design.n_samples, d):
        truth = np.zeros(design.n_samples, dtype=bool)
        truth[list(positives)] = True
        # readouts drawn through the simulator's Tester with an error-free assay
        tester = protocol.Tester(truth, PERFECT, rng)
        readout = tester.read_round(design.pool_ptr, design.pool_members.astype(np.int64))
        np.testing.assert_array_equal(noiseless_decode(design, readout), truth)
    # with d + 1 positives some set is not identified (the guarantee stops at d)
    def identified(positives):
        truth = np.zeros(design.n_samples, dtype=bool)
        truth[list(positives)] = True
        return np.array_equal(noiseless_decode(design, pool_results(design, truth)), truth)
    assert not all(identified(s) for s in itertools.combinations(range(design.n_samples), d + 1))


def test_noiseless_kautz_singleton_agrees_with_exact_decoder():
    # The project's exact decoder with Se = Sp = 1 gives probabilities of exactly 0 and 1 for each
    # specimen when there are at most d positives: the design identifies them.
    from bayespool.decoders import decode
    from bayespool.run import Run
    design = kautz_singleton_design(9, q=3, dimension=2)
    truth = np.zeros(9, dtype=bool)
    truth[[1, 7]] = True
    result = pool_results(design, truth)
    readouts = pd.DataFrame({"pool": design.pool_ids,
                             "result": np.where(result, "positive", "negative")})
    run = Run.from_frames(design.layout, readouts, None, prevalence=0.1)
    post = decode(run, PERFECT)
    order = pd.Index(run.sample_ids).get_indexer(design.sample_ids)
    np.testing.assert_array_equal(post.probability[order], truth.astype(float))


def test_choose_parameters_covers_and_is_smallest():
    for n, d in [(100, 1), (100, 3), (1000, 2), (500, 4), (60, 10)]:
        p = choose_parameters(n, d)
        assert is_prime(p.q) and p.length <= p.q and p.capacity >= n
        if p.dimension > 1:
            assert (p.length - 1) // (p.dimension - 1) >= d
        pools = p.length * min(p.q, n)
        # brute force over small primes and dimensions: nothing with fewer pools qualifies
        for q in [x for x in range(2, 400) if is_prime(x)]:
            for m in range(2, 12):
                length = d * (m - 1) + 1
                if length <= q and q ** m >= n:
                    assert length * min(q, n) >= pools
        assert pools <= n  # never worse than a pool per specimen


def test_kautz_singleton_respects_max_pool_size():
    design = kautz_singleton_design(1000, positives=2, max_pool_size=20)
    assert design.properties.pool_size_max <= 20
    assert design.properties.disjunct >= 2
    assert is_prime(design.properties.parameters["q"])


def test_kautz_singleton_bad_parameters():
    with pytest.raises(InputError, match="prime"):
        kautz_singleton_design(10, q=4, dimension=2)
    with pytest.raises(InputError, match="cannot cover"):
        kautz_singleton_design(30, q=5, dimension=2)
    with pytest.raises(InputError, match="at most q"):
        kautz_singleton_design(10, q=5, dimension=2, length=6)
    with pytest.raises(InputError, match="positives"):  # --positives on the CLI: test_api.py
        kautz_singleton_design(10)
    with pytest.raises(InputError, match="guarantees only"):
        kautz_singleton_design(25, q=5, dimension=2, length=3, positives=3)


# ---- Dorfman blocks
def test_dorfman_blocks():
    design = dorfman_design(23, 5)
    assert design.pool_size.tolist() == [5, 5, 5, 5, 3]
    assert np.all(design.pools_per_sample == 1)
    lay = design.layout
    assert list(lay.columns) == ["pool", "sample"]
    assert lay["sample"].tolist() == [f"S{i:04d}" for i in range(1, 24)]
    assert design.properties.disjunct == 0
    with pytest.raises(InputError, match="max_pool_size"):
        dorfman_design(23, 5, max_pool_size=4)


# ---- arrays (Phatarfod & Sudbury 1994)
def test_array_rows_and_columns():
    design = array_design(96, rows=8, cols=12)
    mat = incidence(design)
    assert design.n_pools == 20
    assert np.all(mat.sum(axis=0) == 2)
    assert sorted(set(design.pool_size.tolist())) == [8, 12]
    gram = mat.T.astype(int) @ mat.astype(int)
    np.fill_diagonal(gram, 0)
    assert gram.max() == 1
    assert design.properties.disjunct == 1
    assert is_disjunct_brute_force(mat, 1)
    assert not is_disjunct_brute_force(mat, 2)  # two positives make a 2 x 2 ambiguity


def test_array_several_grids_and_limits():
    design = array_design(200, rows=8, cols=12)
    assert design.properties.parameters["grids"] == 3
    assert design.n_pools == 20 + 20 + 1 + 8  # last grid: 8 specimens fill part of one row
    assert np.all(design.pools_per_sample == 2)
    with pytest.raises(InputError, match="max_pool_size"):
        array_design(96, rows=8, cols=12, max_pool_size=10)
    small = array_design(20)
    assert small.properties.parameters["rows"] * small.properties.parameters["cols"] >= 20


# ---- random designs
def test_random_design_weights_and_even_sizes():
    n, w, t = 300, 3, 47
    design = random_design(n, w, pools=t, seed=5)
    mat = incidence(design)
    assert np.all(mat.sum(axis=0) == w)            # distinct pools per specimen
    sizes = mat.sum(axis=1)
    assert sizes.max() - sizes.min() <= 1 and sizes.sum() == n * w
    gram = mat.T.astype(int) @ mat.astype(int)
    np.fill_diagonal(gram, 0)
    assert design.properties.max_overlap == gram.max()
    d = design.properties.disjunct
    assert d == (w - 1) // gram.max()
    if d >= 1:
        assert is_disjunct_brute_force(mat, d) if mat.shape[0] <= 63 else True
    again = random_design(n, w, pools=t, seed=5)
    assert again.layout.equals(design.layout)       # reproducible from the seed
    other = random_design(n, w, pools=t, seed=6)
    assert not other.layout.equals(design.layout)


def test_random_design_from_max_pool_size():
    design = random_design(100, 2, max_pool_size=9, seed=1)
    assert design.properties.pool_size_max <= 9
    assert design.n_pools == math.ceil(200 / 9)
    with pytest.raises(InputError):
        random_design(100, 2, pools=10, max_pool_size=9)
    with pytest.raises(InputError, match="exceeds"):
        random_design(10, 5, pools=4)


def test_random_design_wraparound_is_distinct_for_tight_pools():
    # w close to the number of pools forces many windows across permutations; 101 specimens in
    # 4 of 5 pools must repeat a set (only 5 exist), so the design itself is refused and the
    # dealing is checked directly
    from bayespool.design.random_design import deal_memberships
    table = deal_memberships(101, 4, 5, np.random.default_rng(3))
    assert all(len(set(row)) == 4 for row in table.tolist())
    with pytest.raises(InputError, match="only 5 distinct sets of 4"):
        random_design(101, 4, pools=5, seed=3)
    design = random_design(5, 4, pools=5, seed=3)
    assert np.all(incidence(design).sum(axis=0) == 4)


def test_make_design_and_samples_file(tmp_path):
    f = tmp_path / "samples.csv"
    f.write_text("sample,prior\nA,0.1\nB,\nC,0.2\nD,0.3\n", encoding="utf-8")
    design = make_design("dorfman", str(f), pool_size=2)
    assert design.layout["sample"].tolist() == ["A", "B", "C", "D"]
    with pytest.raises(InputError, match="unknown design scheme"):
        make_design("nope", 10)
    bad = tmp_path / "bad.csv"
    bad.write_text("sample\nA\nA\n", encoding="utf-8")
    with pytest.raises(InputError, match="twice") as err:
        make_design("dorfman", str(bad), pool_size=2)
    assert err.value.line == 3


# ---- random designs never give two specimens the same pools
@pytest.mark.parametrize("n, w, t", [(60, 2, 12), (66, 2, 12), (200, 3, 12), (300, 2, 30)])
def test_random_design_gives_every_specimen_its_own_set_of_pools(n, w, t):
    # brute force over all pairs: identical pool sets could never be told apart by any readouts;
    # the swaps that separate them keep pool sizes within one of each other
    for seed in range(5):
        d = make_design("random", n, pools_per_sample=w, pools=t, seed=seed)
        sets = [frozenset(d.pool_ids[d.pool_ptr.searchsorted(np.flatnonzero(d.pool_members == i),
                                                             side="right") - 1])
                for i in range(n)]
        assert all(len(s) == w for s in sets)
        assert len(set(sets)) == n
        sizes = np.diff(d.pool_ptr)
        assert sizes.max() - sizes.min() <= 1
        assert d.properties.max_overlap < w


def test_random_design_refuses_more_specimens_than_sets_of_pools():
    # pigeonhole: 12 pools give C(12, 2) = 66 distinct pairs, so 67 specimens must share one
    with pytest.raises(InputError, match="only 66 distinct sets of 2"):
        make_design("random", 67, pools_per_sample=2, pools=12, seed=0)
