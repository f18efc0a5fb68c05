"""The closed loop's memo of exact enumerations changes no number.

The reference is the plain exact enumeration (itself checked against pgmpy's VariableElimination in
test_exact_vs_pgmpy.py): with an :class:`ExactMemo` the marginals, evidence, count distributions and
joint draws must be bit-identical to enumerating every component afresh, and a simulated study of the
Bayesian loop must give identical per-run counts with and without it.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import components, decode
from bayespool.decoders.exact import ExactMemo
from bayespool.decoders.exact_sample import sample_exact
from bayespool.run import Run
from bayespool.simulation import simulate

from .conftest import random_design

ASSAYS = [Assay(0.99, ConstantSensitivity(0.95)),
          Assay(0.98, DilutionSensitivity(se_max=0.97, r50=20.0, slope=1.4)),
          Assay(1.0, ConstantSensitivity(0.9))]  # Sp = 1: hard constraints


def _growing_runs(rng, assay):
    """A run read in three stages (pools added each time), as the closed loop grows it."""
    n = 30
    layout = random_design(rng, n, 14, max_pool=6, min_pool=2)
    truth = rng.random(n) < 0.15
    pools = layout["pool"].unique()
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(n)],
                            "prior": np.round(rng.uniform(0.02, 0.3, n), 3)})
    out = []
    for stop in (5, 10, 14):
        lay = layout[layout["pool"].isin(pools[:stop])]
        res = []
        for p, g in lay.groupby("pool", sort=False):
            members = g["sample"].str[1:].astype(int).to_numpy()
            d = int(truth[members].sum())
            pr = float(assay.positive_probability(np.array([len(members)]), np.array([d]))[0])
            res.append({"pool": p, "result": "positive" if rng.random() < pr else "negative"})
        out.append(Run.from_frames(lay, pd.DataFrame(res), samples))
    return out


def test_remembered_decodes_and_draws_are_bit_identical():
    rng = np.random.default_rng(12)
    for assay in ASSAYS:
        for _ in range(4):
            memo = ExactMemo()
            for run in _growing_runs(rng, assay) * 2:  # the second pass meets every one again
                try:
                    plain = decode(run, assay, method="exact")
                except Exception as exc:  # impossible evidence under Sp = 1: both must say so
                    try:
                        decode(run, assay, method="exact", exact_memo=memo)
                    except type(exc):
                        continue
                    raise AssertionError("the memo hid impossible evidence")
                kept = decode(run, assay, method="exact", exact_memo=memo)
                assert np.array_equal(plain.probability, kept.probability)
                assert plain.log_evidence == kept.log_evidence
                assert np.array_equal(plain.count_distribution, kept.count_distribution)
                comps = components(run)
                lik_ptr, loglik = run.log_likelihood(assay)
                sel = np.flatnonzero(comps.sizes > 1)
                a = sample_exact(run, lik_ptr, loglik, comps, sel, 50, np.random.default_rng(3))
                b = sample_exact(run, lik_ptr, loglik, comps, sel, 50, np.random.default_rng(3),
                                 memo=memo)
                assert np.array_equal(a, b)
            assert memo.marginals and memo.cdfs  # the memo was used, not bypassed


def test_memo_is_bounded():
    memo = ExactMemo()
    memo.CDF_LIMIT = 100
    memo.remember_cdf(b"a", np.ones(60))
    memo.remember_cdf(b"b", np.ones(60))  # would pass the bound: the store is emptied first
    assert list(memo.cdfs) == [b"b"] and memo.cdf_size == 60


def test_the_loop_gives_the_same_numbers_with_and_without_the_memo():
    assay = ASSAYS[1]
    opts = dict(tests=16, max_pool_size=8, n_draws=200)
    fast = simulate("bayes", 96, prevalence=0.04, assay=assay, runs=4, seed=21, **opts)
    plain = simulate("bayes", 96, prevalence=0.04, assay=assay, runs=4, seed=21, remember=False, **opts)
    assert fast.runs_frame.equals(plain.runs_frame)
