"""Informative Dorfman (`design --scheme dorfman --by-risk`): pools of similar risk.

Sources: Dorfman (1943) expected tests 1/k + 1 - (1 - p)^k and its best pool sizes (p = 0.02 ->
k = 8, p = 0.05 -> k = 5, from memory as quoted in the shared references); the dynamic programme
against a brute-force search over every cut of the sorted risks; sorting by risk does not raise
the expected number of tests (McMahan, Tebbs & Bilder 2012).
"""
import itertools

import numpy as np
import pytest

from bayespool.design.informative import optimal_blocks

from .conftest import write_csv


def expected_tests(p, ptr):
    return sum(1.0 if b - a == 1 else 1.0 + (b - a) * (1 - np.prod(1 - p[a:b]))
               for a, b in zip(ptr[:-1], ptr[1:]))


@pytest.mark.parametrize("p,k", [(0.02, 8), (0.05, 5)])
def test_equal_risks_give_dorfmans_best_pool_size(p, k):
    ptr = optimal_blocks(np.full(10 * k, p), 16)
    assert set(np.diff(ptr).tolist()) == {k}


def test_dynamic_programme_against_brute_force():
    rng = np.random.default_rng(0)
    for _ in range(5):
        p = np.sort(rng.beta(0.5, 12, 10))
        best = min(expected_tests(p, [0, *cuts, 10])
                   for r in range(10) for cuts in itertools.combinations(range(1, 10), r)
                   if all(b - a <= 4 for a, b in zip([0, *cuts], [*cuts, 10])))
        assert expected_tests(p, optimal_blocks(p, 4)) == pytest.approx(best, rel=1e-12)


def test_cli_by_risk_sorts_and_saves_tests(cli, tmp_path):
    rng = np.random.default_rng(1)
    prior = np.where(rng.random(64) < 0.2, 0.2, 0.005)
    sm = write_csv(tmp_path / "priors.csv", [(f"S{i}", v) for i, v in enumerate(prior)],
                   ["sample", "prior"])
    out = tmp_path / "layout.csv"
    res = cli("design", "--scheme", "dorfman", "--samples", sm, "--by-risk", "--pool-size", "8",
              "--out", out)
    assert res.code == 0, res.err
    rows = [line.split(",") for line in out.read_text().splitlines()[1:]]
    pools = {}
    for pool, s in rows:
        pools.setdefault(pool, []).append(prior[int(s[1:])])
    assert all(len(set(v)) <= 2 for v in pools.values())
    assert sum(len(set(v)) == 2 for v in pools.values()) <= 1   # one pool straddles the groups
    blocks = np.arange(0, 72, 8).clip(max=64)
    assert expected_tests(np.sort(prior), blocks) <= expected_tests(prior, blocks)
    assert cli("design", "--scheme", "array", "--samples", sm, "--by-risk", "--out",
               tmp_path / "a.csv").code == 2
    no_prior = write_csv(tmp_path / "plain.csv", [("a",), ("b",)], ["sample"])
    res = cli("design", "--scheme", "dorfman", "--samples", no_prior, "--by-risk",
              "--pool-size", "2", "--out", tmp_path / "b.csv")
    assert res.code == 2 and "prior" in res.err
