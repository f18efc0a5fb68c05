"""Dorfman pools followed by a code round: simulation protocol and planner candidates.

References: Dorfman (1943) for the first stage; Kim et al. (2007), Biometrics 63(4), for the
probability that a pool reads positive with test error, P = Se (1 - q^k) + (1 - Sp) q^k (from
memory); MacWilliams & Sloane (1977) for the code's single-error correction.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.design import code_design
from bayespool.simulation import protocol
from bayespool.simulation.protocols import make_protocol

PERFECT = Assay(1.0, ConstantSensitivity(1.0))


def test_one_positive_per_pool_is_found_with_a_perfect_assay():
    # error-free tests, one positive in each of some pools: every call right, and the count of
    # tests is n/k + (positive pools) x (code length) exactly, in two rounds
    rng = np.random.default_rng(0)
    n, k = 320, 32
    length = code_design(k).n_pools
    for trial in range(5):
        truth = np.zeros(n, dtype=bool)
        pools = rng.choice(n // k, size=trial + 1, replace=False)
        truth[pools * k + rng.integers(0, k, size=len(pools))] = True
        tester = protocol.Tester(truth, PERFECT, np.random.default_rng(trial))
        out = make_protocol("pool-then-code", pool_size=k).run(tester, np.full(n, 0.01))
        assert np.array_equal(out.calls, truth)
        assert out.tests == n // k + len(pools) * length and out.rounds == 2


def test_a_wrong_readout_in_the_code_round_is_corrected():
    # Sp slightly below 1 in a pool of 16 with one positive: the code round's one false positive is
    # outvoted (distance >= 3), so the protocol still names the right specimen
    assay = Assay(0.9999, ConstantSensitivity(0.9999))
    n, k = 16, 16
    truth = np.zeros(n, dtype=bool)
    truth[6] = True
    design = code_design(k)

    class OneFlip(protocol.Tester):
        def read_round(self, ptr, members):
            y = super().read_round(ptr, members)
            if self.rounds == 2:
                y = y.copy()
                y[3] ^= True
            return y

    assert design.n_pools > 3
    tester = OneFlip(truth, assay, np.random.default_rng(1))
    out = make_protocol("pool-then-code", pool_size=k).run(tester, np.full(n, 0.01))
    assert np.array_equal(out.calls, truth)


def test_tests_per_specimen_against_the_first_stage_closed_form():
    # without ambiguity the expected cost is 1/k + P(pool positive) * L / k, with P from
    # Kim et al. (2007); at prevalence 0.2% a pool rarely holds two positives, so the simulated
    # cost lies within 4 Monte Carlo standard errors of it (plus the rare third round)
    from bayespool.simulation import simulate
    assay = Assay(0.995, ConstantSensitivity(0.95))
    p, k, n = 0.002, 32, 960
    sim = simulate("pool-then-code", n, prevalence=p, assay=assay, runs=150, seed=3, pool_size=k)
    q = 1 - p
    p_pos = 0.95 * (1 - q**k) + 0.005 * q**k
    expected = 1 / k + p_pos * code_design(k).n_pools / k
    t = sim.characteristics.table().set_index("characteristic")
    est, se = t.loc["tests_per_sample", "estimate"], t.loc["tests_per_sample", "mcse"]
    assert abs(est - expected) <= 4 * se + 0.002, (est, expected, se)


def test_simulate_cli(cli):
    r = cli("simulate", "--scheme", "pool-then-code", "--pool-size", 16, "--prevalence", 0.01,
            "--samples", 160, "--runs", 10, "--seed", 1, "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    assert {"tests_per_sample", "sensitivity", "specificity"} <= set(info)
    r = cli("simulate", "--scheme", "pool-then-code", "--prevalence", 0.01, "--samples", 160,
            "--runs", 10)
    assert r.code == 2 and "--pool-size" in r.err


def test_planner_offers_a_code_follow_up_of_a_positive_pool():
    from bayespool.decoders import decode
    from bayespool.planning.candidates import CODE, generate
    from bayespool.decoders.graph import components
    from bayespool.run import Run
    assay = Assay(0.999, ConstantSensitivity(0.99))
    layout = pd.DataFrame({"pool": ["P1"] * 16 + ["P2"] * 16,
                           "sample": [f"S{i}" for i in range(32)]})
    readouts = pd.DataFrame({"pool": ["P1", "P2"], "result": ["positive", "negative"]})
    run = Run.from_frames(layout, readouts, None, prevalence=0.01)
    post = decode(run, assay)
    undecided = post.undecided()
    comps = components(run)
    allowed = np.ones(65, dtype=bool)
    cands = generate(run, post.probability, undecided, comps, 16, allowed)
    code = np.flatnonzero(cands.kind == CODE)
    assert len(code) == code_design(16).n_pools
    p1 = set(run.members(0).tolist())
    patterns = {}
    for c in code:
        assert set(cands.members_of(c).tolist()) <= p1 and cands.source[c] == 0
        for i in cands.members_of(c):
            patterns[int(i)] = patterns.get(int(i), 0) | (1 << int(c - code[0]))
    # every member of the positive pool gets a distinct nonzero pattern: one round names it
    assert len(patterns) == 16 and len(set(patterns.values())) == 16
