"""The greedy batch: joint information never below what it reports, and every limit respected.

Sources: the chain rule of mutual information and the submodularity of the information of
conditionally independent readouts (Krause & Guestrin 2005, UAI, from memory) give, for picks
a before b, reported(a) + reported(b) <= I(Y_a, Y_b; X); specimens in different linked groups are
independent a posteriori (the factorisation of the posterior over connected components).
"""
import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.decoders.exact import EXACT_LIMIT
from bayespool.planning import DEFAULT_MAX_LINKED, joint_information, plan, pool_information
from bayespool.planning.draws import posterior_draws
from bayespool.run import Run

from .conftest import random_design

NOISY = Assay(0.99, ConstantSensitivity(0.95))
DILUTED = Assay(0.995, DilutionSensitivity(0.97, 10.0, 1.5))


def positive_pool_run(k=12, extra=0):
    """One read positive pool of k specimens (+ extra untested specimens), prevalence 0.05."""
    layout = pd.DataFrame({"pool": ["A"] * k, "sample": [f"S{i}" for i in range(k)]})
    readouts = pd.DataFrame({"pool": ["A"], "result": ["positive"]})
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(k + extra)]})
    return Run.from_frames(layout, readouts, samples, prevalence=0.05)


def block_design(rng, n_blocks, block, pools_per_block, max_pool, min_pool):
    """Random pools within blocks of specimens, so linked groups stay small enough to decode."""
    frames = []
    for b in range(n_blocks):
        part = random_design(rng, block, pools_per_block, max_pool=max_pool, min_pool=min_pool)
        part["pool"] = f"b{b}" + part["pool"]
        part["sample"] = "S" + (part["sample"].str[1:].astype(int) + b * block).astype(str)
        frames.append(part)
    return pd.concat(frames, ignore_index=True)


def read_at_random(layout, n, prevalence, assay, rng, samples=None):
    truth = rng.random(n) < prevalence
    if samples is None:
        samples = pd.DataFrame({"sample": [f"S{i}" for i in range(n)]})
    run0 = Run.from_frames(layout, None, samples, prevalence=0.1)
    index = pd.Index(run0.sample_ids)
    order = index.get_indexer([f"S{i}" for i in range(n)])
    t_run = np.zeros(n, dtype=bool)
    t_run[order] = truth
    pos = np.array([t_run[run0.members(t)].sum() for t in range(run0.n_pools)])
    res = assay.draw_readouts(run0.pool_size, pos, rng)
    return run0.with_readouts(np.arange(run0.n_pools), res.astype(int))


def test_max_linked_default_is_the_exact_limit():
    assert DEFAULT_MAX_LINKED == EXACT_LIMIT


@pytest.mark.parametrize("assay", [NOISY, DILUTED])
def test_pairs_in_one_group_never_below_reported(assay):
    run = positive_pool_run(12)
    post = decode(run, assay)
    draws = posterior_draws(run, assay, post, 2000, np.random.default_rng(3))
    result = plan(run, assay, posterior=post, tests=8, draws=draws, max_pool_size=8)
    assert result.n_tests >= 3
    pools = [result.members(j) for j in range(result.n_tests)]
    info = result.information
    for a in range(len(pools)):
        for b in range(a + 1, len(pools)):
            joint = joint_information(draws, [pools[a], pools[b]], assay)
            assert info[a] + info[b] <= joint + 1e-9, (a, b)
    # one linked group: the reported gains add up to the joint information (chain rule)
    total = joint_information(draws, pools, assay)
    assert result.total_information == pytest.approx(total, abs=1e-9)
    assert info.sum() == pytest.approx(total, abs=1e-9)
    # and each reported gain is at most what the test would tell alone
    for j, m in enumerate(pools):
        assert info[j] <= pool_information(draws, m, assay)[1] + 1e-9


def test_pairs_across_independent_groups_never_below_reported():
    rng = np.random.default_rng(11)
    layout = block_design(rng, 5, 8, 3, max_pool=4, min_pool=2)
    run = read_at_random(layout, 40, 0.15, NOISY, rng)
    post = decode(run, NOISY)
    draws = posterior_draws(run, NOISY, post, 2000, np.random.default_rng(5))
    result = plan(run, NOISY, posterior=post, tests=12, draws=draws, max_pool_size=6)
    from bayespool.decoders.graph import components
    label = components(run).sample_label
    pools = [result.members(j) for j in range(result.n_tests)]
    single = [pool_information(draws, m, NOISY)[1] for m in pools]
    for a in range(len(pools)):
        for b in range(a + 1, len(pools)):
            if set(label[pools[a]]) & set(label[pools[b]]):
                joint = joint_information(draws, [pools[a], pools[b]], NOISY)
            else:  # independent a posteriori: the joint information is the sum
                joint = single[a] + single[b]
            assert result.information[a] + result.information[b] <= joint + 1e-9


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_limits_batch_size_pool_size_draws_and_fresh_ids(seed):
    rng = np.random.default_rng(seed)
    n = 60
    layout = block_design(rng, 6, 10, 3, max_pool=6, min_pool=3)
    ids = pd.Index(layout["pool"].unique())
    layout.loc[layout["pool"] == ids[0], "pool"] = "B1_01"  # an existing ID the planner could use
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(n)],
                            "draws_left": ["1" if i % 7 == 0 else "" for i in range(n)]})
    run = read_at_random(layout, n, 0.2, NOISY, rng, samples)
    post = decode(run, NOISY)
    for tests, k, max_draws in ((5, 4, 1), (30, 8, 2), (50, 3, None)):
        result = plan(run, NOISY, posterior=post, tests=tests, max_pool_size=k, max_draws=max_draws,
                      seed=seed)
        assert 0 < result.n_tests <= tests
        frame = result.to_frame()
        new = frame[frame["kind"] != "replicate"]
        assert (new.groupby("pool")["sample"].size() <= k).all()
        assert not set(frame["pool"]) & set(run.pool_ids.astype(str))
        assert frame.groupby("pool").ngroups == result.n_tests
        assert not frame.duplicated(["pool", "sample"]).any()
        used = new["sample"].value_counts()
        limit = pd.Series(max_draws if max_draws is not None else 10**9, index=used.index)
        limited = [f"S{i}" for i in range(0, n, 7)]
        limit[limit.index.isin(limited)] = np.minimum(limit[limit.index.isin(limited)], 1)
        assert (used <= limit).all()
        # only undecided specimens are drawn into new pools
        undecided = set(post.sample_ids[post.undecided()])
        assert set(new["sample"]) <= undecided
        # replicates re-read an existing pool with exactly its members
        for pool, rows in frame[frame["kind"] == "replicate"].groupby("pool"):
            t = int(np.flatnonzero(run.pool_ids == rows["follows_pool"].iat[0])[0])
            assert set(rows["sample"]) == set(run.sample_ids[run.members(t)])


def test_second_batch_gets_new_stage_ids_and_linked_limit():
    run = positive_pool_run(16, extra=40)
    post = decode(run, NOISY)
    first = plan(run, NOISY, posterior=post, tests=20, seed=1, max_linked=20)
    assert all(str(p).startswith("B1_") for p in first.pool_ids)
    rng = np.random.default_rng(0)
    run2 = first.extend(run, rng.random(first.n_tests) < 0.3)
    second = plan(run2, NOISY, tests=10, seed=1, max_linked=20)
    assert all(str(p).startswith("B2_") for p in second.pool_ids)
    # no linked group of the next decode exceeds max_linked
    from bayespool.decoders.graph import components
    run3 = second.extend(run2, np.zeros(second.n_tests, dtype=bool))
    assert components(run3).sizes.max() <= 20


def test_every_specimen_decided_gives_an_empty_plan():
    layout = pd.DataFrame({"pool": ["A", "A", "B"], "sample": ["S0", "S1", "S2"]})
    readouts = pd.DataFrame({"pool": ["A", "B"], "result": ["negative", "negative"]})
    run = Run.from_frames(layout, readouts, prevalence=0.01)
    result = plan(run, Assay(1.0, ConstantSensitivity(1.0)))
    assert result.decided and result.n_tests == 0
    assert list(result.to_frame().columns)[:2] == ["pool", "sample"]
    assert len(result.to_frame()) == 0


def test_first_stage_pools_are_sized_for_information():
    # at prevalence 0.02 a pool of 16 tells far more than a retest: the first stage pools, and
    # it covers every specimen before it pools anyone twice
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(160)]})
    run = Run.from_frames(pd.DataFrame({"pool": [], "sample": []}), None, samples, 0.02)
    result = plan(run, NOISY, tests=10, seed=0, max_pool_size=16)
    assert result.n_tests == 10
    assert (result.pool_size == 16).all()
    assert len(np.unique(result.pool_members)) == 160
    # the reported probability of a positive readout is the closed form (Kim et al. 2007)
    q0 = 0.98 ** 16
    assert result.positive_probability == pytest.approx(0.95 * (1 - q0) + 0.01 * q0, abs=0.03)


def test_decoder_draws_are_used_when_present():
    run = positive_pool_run(6)
    post = decode(run, NOISY)
    fake = np.zeros((50, run.n_samples), dtype=np.uint8)
    fake[:, 0] = 1  # a decoder that is sure specimen 0 is the positive one
    post.draws = fake
    got = posterior_draws(run, NOISY, post, 20, np.random.default_rng(0))
    assert got.shape == (20, run.n_samples)
    assert (got[:, 0] == 1).all() and got[:, 1:].sum() == 0


def test_bad_options_are_input_errors():
    from bayespool.errors import InputError
    run = positive_pool_run(4)
    # the library names the Python parameter; the command line's flags: tests/test_api.py
    with pytest.raises(InputError, match="tests"):
        plan(run, NOISY, tests=0)
    with pytest.raises(InputError, match="max_pool_size"):
        plan(run, NOISY, tests=3, max_pool_size=0)
    with pytest.raises(InputError, match="max_draws"):
        plan(run, NOISY, tests=3, max_draws=[1, 2])


def test_untested_specimens_are_never_decided_by_their_prior():
    # prevalence 0.5% is below the negative threshold 0.01, yet nobody has been tested
    samples = pd.DataFrame({"sample": [f"S{i}" for i in range(64)]})
    run = Run.from_frames(pd.DataFrame({"pool": [], "sample": []}), None, samples, 0.005)
    result = plan(run, NOISY, tests=8, seed=0)
    assert not result.decided and result.undecided == 64
    assert len(np.unique(result.pool_members)) == 64


def test_tests_within_a_group_above_the_link_limit_are_allowed():
    # a read pool of 25 is one linked group above 22: tests inside it add no specimen to it
    run = positive_pool_run(25, extra=10)
    post = decode(run, NOISY, method="bp")
    notes_plan = plan(run, NOISY, posterior=post, tests=6, seed=1)
    assert notes_plan.n_tests > 0
    assert any("marginals" in n for n in notes_plan.notes)
    from bayespool.decoders.graph import components
    comps = components(run)
    big = comps.sample_label[0]
    for j in range(notes_plan.n_tests):
        labels = set(comps.sample_label[notes_plan.members(j)])
        assert labels == {big} or big not in labels
