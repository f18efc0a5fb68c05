"""Designs from error-correcting codes: code parameters, distance and single-positive decoding.

Sources: MacWilliams, F. J. & Sloane, N. J. A. (1977), The Theory of Error-Correcting Codes: binary
Hamming codes are [2^r - 1, 2^r - r - 1, 3], extended Hamming codes [2^r, 2^r - r - 1, 4], the
double-error-correcting BCH code of length 15 is [15, 7, 5] with generator x^8 + x^7 + x^6 + x^4 + 1
and the triple-error-correcting one [15, 5, 7] (all from memory). Everything else is brute force:
distances by enumerating every pair of codewords, decoding by trying every set of flipped readouts.
"""
from __future__ import annotations

import itertools
import json

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.design import code_design, nearest_specimen, pool_results
from bayespool.design import gf2
from bayespool.design.code import choose_words, design_words, make_code, words_distance


def _pairwise_min_distance(words) -> int:
    """Smallest Hamming distance over every pair of distinct words (brute force, bit by bit)."""
    best = 10**9
    for a, b in itertools.combinations([int(w) for w in words], 2):
        best = min(best, bin(a ^ b).count("1"))
    return best


@pytest.mark.parametrize("r", [2, 3, 4])
def test_hamming_parameters(r):
    # MacWilliams & Sloane 1977 (from memory): Hamming [2^r - 1, 2^r - r - 1, 3]
    code = make_code("hamming", r)
    assert (code.length, code.dimension) == (2**r - 1, 2**r - r - 1)
    words = code.codewords()
    assert len(np.unique(words)) == 2**code.dimension
    assert _pairwise_min_distance(words) == 3 == code.minimum_distance()


@pytest.mark.parametrize("r", [2, 3, 4])
def test_extended_hamming_parameters(r):
    # MacWilliams & Sloane 1977 (from memory): extended Hamming [2^r, 2^r - r - 1, 4]
    code = make_code("extended-hamming", r)
    assert (code.length, code.dimension) == (2**r, 2**r - r - 1)
    assert _pairwise_min_distance(code.codewords()) == 4 == code.minimum_distance()
    assert (gf2.popcount(code.codewords()) % 2 == 0).all()  # every word has even weight


def test_bch_codes_of_length_15():
    # MacWilliams & Sloane 1977 (from memory): [15, 7, 5] with g = x^8 + x^7 + x^6 + x^4 + 1;
    # [15, 5, 7] for t = 3
    two = make_code("bch", 4, t=2)
    assert two.generator_polynomial == 0b111010001
    assert (two.length, two.dimension) == (15, 7)
    assert _pairwise_min_distance(two.codewords()) == 5
    three = make_code("bch", 4, t=3)
    assert (three.length, three.dimension) == (15, 5)
    assert _pairwise_min_distance(three.codewords()) == 7


def test_primitive_polynomials_generate_the_whole_field():
    for m in range(2, 8):
        exp, log = gf2.field_tables(m)
        order = 2**m - 1
        # alpha^0..alpha^(order-1) are every nonzero element exactly once
        assert sorted(exp[:order].tolist()) == list(range(1, 2**m))
        assert gf2.degree(gf2.primitive_polynomial(m)) == m


@pytest.mark.parametrize("dimension", [3, 5, 7, 9])
def test_shortening_keeps_the_distance(dimension):
    code = make_code("hamming", 4, dimension=dimension)
    assert code.length == 4 + dimension
    assert _pairwise_min_distance(code.codewords()) >= 3


def _flips(n_pools, up_to):
    for e in range(up_to + 1):
        yield from itertools.combinations(range(n_pools), e)


@pytest.mark.parametrize("n,errors,family", [(5, 1, None), (16, 1, None), (33, 1, None),
                                             (64, 1, None), (16, 1, "extended-hamming"),
                                             (12, 2, None), (20, 2, "extended-bch"),
                                             (8, 3, None)])
def test_every_single_positive_is_found_despite_tolerated_errors(n, errors, family):
    design = code_design(n, errors=errors, code=family)
    words = design_words(design)
    assert len(np.unique(words)) == n and (words != 0).all()  # distinct, no all-zero word
    # the distance the design reports, checked by brute force over every pair (zero word included)
    delta = _pairwise_min_distance(np.concatenate([[0], words]))
    assert delta == design.properties.parameters["design_distance"]
    tolerated = (delta - 1) // 2
    assert tolerated >= errors == min(errors, design.properties.parameters["errors_tolerated"])
    for i in range(-1, n):  # -1: nobody positive
        truth = np.zeros(n, dtype=bool)
        if i >= 0:
            truth[i] = True
        clean = pool_results(design, truth)
        assert nearest_specimen(design, clean).specimen == i
        for flipped in _flips(design.n_pools, tolerated):
            y = clean.copy()
            y[list(flipped)] ^= True
            call = nearest_specimen(design, y)
            assert call.specimen == i and call.unique and call.distance == len(flipped)


def test_constant_weight_preferred():
    for n in (10, 16, 32, 64):
        choice = choose_words(n)
        weights = gf2.popcount(choice.words)
        assert choice.constant_weight and len(np.unique(weights)) == 1
        design = code_design(n)
        assert design.properties.pools_per_sample_min == design.properties.pools_per_sample_max


def test_follow_up_sizes_are_near_the_sphere_packing_bound():
    # the follow-up use: a positive pool of k members sorted out in one round of few pools. Any
    # design that corrects one wrong readout among k + 1 words (k specimens and "nobody") needs
    # 2^n >= (k + 1)(n + 1) (the sphere-packing or Hamming bound, MacWilliams & Sloane 1977);
    # the shortest linear code, held to one weight, stays within 3 pools of it
    for k in (16, 32, 64):
        bound = next(n for n in range(1, 64) if 2**n >= (k + 1) * (n + 1))
        pools = code_design(k).n_pools
        assert bound <= pools <= bound + 3, (k, bound, pools)
        assert pools < k / 1.5


def test_words_distance_matches_brute_force():
    rng = np.random.default_rng(3)
    words = rng.integers(1, 2**12, size=30).astype(np.uint64)
    assert words_distance(words) == _pairwise_min_distance(np.concatenate([[0], words]))


def test_exact_decoder_names_the_positive_despite_a_wrong_readout():
    # The Bayesian decoder on the same layout (a near-perfect assay, prevalence 1%): with one
    # positive and one flipped readout the true specimen has by far the highest probability.
    from bayespool.decoders import decode
    from bayespool.run import Run
    assay = Assay(0.99, ConstantSensitivity(0.99))
    design = code_design(16)
    truth = np.zeros(16, dtype=bool)
    truth[5] = True
    y = pool_results(design, truth)
    y[2] ^= True
    readouts = pd.DataFrame({"pool": design.pool_ids,
                             "result": np.where(y, "positive", "negative")})
    run = Run.from_frames(design.layout, readouts, None, prevalence=0.01)
    post = decode(run, assay, method="exact")
    order = pd.Index(run.sample_ids).get_indexer(design.sample_ids)
    p = post.probability[order]
    assert int(np.argmax(p)) == 5 and p[5] > 0.5 and np.delete(p, 5).max() < 0.1


def test_code_design_cli(cli, tmp_path):
    out = tmp_path / "layout.csv"
    r = cli("design", "--scheme", "code", "--samples", 16, "--out", out)
    assert r.code == 0, r.err
    assert "Hamming code [" in r.out and "up to 1 wrong readout" in r.out
    assert "pool E001:" in r.out
    lay = pd.read_csv(out, dtype=str)
    assert list(lay.columns) == ["pool", "sample"] and lay["sample"].nunique() == 16
    r = cli("design", "--scheme", "code", "--samples", 20, "--errors", 2, "--out",
            tmp_path / "b.csv", "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    assert info["parameters"]["errors_tolerated"] >= 2 and "BCH" in info["parameters"]["code"]
    r = cli("design", "--scheme", "code", "--samples", 20, "--errors", 2, "--code", "hamming",
            "--out", tmp_path / "c.csv")
    assert r.code == 2 and "bch" in r.err and "Traceback" not in r.err
