"""``auto`` is exact where it can be and marks where it is not, checked against exact enumeration.

Reference: the exact decoder (Gray-code enumeration, itself checked against pgmpy's
VariableElimination in test_exact.py). The designs and readouts are simulated test fixtures.
"""
import numpy as np
import pandas as pd

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.decoders import decode
from bayespool.decoders.loopy import CHECK_Z
from bayespool.run import Run

ASSAY = Assay(0.99, ConstantSensitivity(0.95))


def dense_groups(rng, groups, n_range=(16, 20), w_range=(3, 6), k_range=(5, 10), prevalence=0.05):
    """Independent loopy groups: each specimen in 3-6 pools of 5-10 members of its own group."""
    lay, rd = dense_frames(rng, groups, n_range, w_range, k_range, prevalence)
    return Run.from_frames(lay, rd, prevalence=prevalence)


def dense_frames(rng, groups, n_range, w_range, k_range, prevalence, prefix="G"):
    """Layout and readouts of :func:`dense_groups` (names start with ``prefix``)."""
    lay, rd = [], []
    for g in range(groups):
        n = int(rng.integers(n_range[0], n_range[1] + 1))
        x = rng.random(n) < prevalence
        slots = [s for s in range(n) for _ in range(int(rng.integers(w_range[0], w_range[1] + 1)))]
        rng.shuffle(slots)
        pools, current = [], []
        target = int(rng.integers(k_range[0], k_range[1] + 1))
        for s in slots:
            if s in current:
                continue
            current.append(s)
            if len(current) == target:
                pools.append(current)
                current, target = [], int(rng.integers(k_range[0], k_range[1] + 1))
        if current:
            pools.append(current)
        for t, members in enumerate(pools):
            name = f"{prefix}{g}P{t}"
            lay += [(name, f"{prefix}{g}S{s}") for s in members]
            d = int(x[members].sum())
            p = float(ASSAY.positive_probability(np.array([len(members)]), np.array([d]))[0])
            rd.append((name, "positive" if rng.random() < p else "negative"))
    return (pd.DataFrame(lay, columns=["pool", "sample"]),
            pd.DataFrame(rd, columns=["pool", "result"]))


def test_sixty_small_dense_loopy_groups_are_all_enumerated():
    # groups of 20 (the top of the 16-20 range): 60 x 2^20 x 21 = 1.3e9 state updates, past the
    # one budget of 2^30 that the whole run used to share
    run = dense_groups(np.random.default_rng(18), 60, n_range=(20, 20))
    # the dispatch is under test: the batch expectations and the model check would walk every
    # group's 2^20 states again (tests/test_decisions.py and test_modelcheck.py check them)
    bare = {"expectations": False, "model_check": False}
    auto = decode(run, ASSAY, **bare)
    exact = decode(run, ASSAY, method="exact", **bare)
    # before: one budget shared by the run sent 12 of 60 such groups to BP (max error 0.50)
    assert np.abs(auto.probability - exact.probability).max() <= 0.02
    assert set(auto.sample_method) == {"exact"}
    assert auto.diagnostics["bp_loopy_samples"] == 0


def test_loopy_groups_left_to_bp_are_marked_and_counted():
    # one loopy group of 30 specimens is above the enumeration limit; without the sampler
    # (loopy_sampler_limit=0) BP's answer is kept, marked bp-loopy
    rng = np.random.default_rng(4)
    run = dense_groups(rng, 1, n_range=(30, 30), w_range=(2, 2), k_range=(4, 6))
    post = decode(run, ASSAY, loopy_sampler_limit=0)
    assert set(post.sample_method) == {"bp-loopy"}
    assert post.diagnostics["bp_loopy_samples"] == run.n_samples
    assert any("bp-loopy" in w for w in post.warnings)
    frame = post.to_frame()
    assert set(frame["method"]) == {"bp-loopy"}
    # a tree-shaped group (Dorfman: one pool) is exact under BP and is not marked
    tree = Run.from_frames(pd.DataFrame({"pool": ["A"] * 30, "sample": [f"S{i}" for i in range(30)]}),
                           pd.DataFrame({"pool": ["A"], "result": ["positive"]}), prevalence=0.01)
    assert set(decode(tree, ASSAY).sample_method) == {"bp"}


def test_loopy_groups_past_the_enumeration_limit_go_to_the_sampler_and_check_bp():
    """Groups of 30 and 40 linked specimens: with room for 35 specimens the sampler re-decodes
    the group of 30 from BP's answer, and the group of 40 keeps BP's answer, marked bp-loopy, with
    the measured gap between BP and the sampler said in the warning."""
    rng = np.random.default_rng(4)
    small = dense_frames(rng, 1, (30, 30), (2, 2), (4, 6), 0.05, prefix="G")
    large = dense_frames(rng, 1, (40, 40), (2, 2), (4, 6), 0.05, prefix="H")
    lay, rd = pd.concat([small[0], large[0]]), pd.concat([small[1], large[1]])
    run = Run.from_frames(lay, rd, prevalence=0.05)
    post = decode(run, ASSAY, loopy_sampler_limit=35, seed=2)
    method = pd.Series(post.sample_method, index=run.sample_ids)
    assert set(method[[i for i in run.sample_ids if i.startswith("G0")]]) == {"gibbs"}
    assert set(method[[i for i in run.sample_ids if i.startswith("H0")]]) == {"bp-loopy"}
    check = post.diagnostics["loopy_check"]
    assert check["groups"] == 1 and check["samples"] == 30
    assert post.diagnostics["bp_loopy_samples"] == 40
    assert any("BP differed from it by up to" in w for w in post.warnings)


def test_large_dense_run_auto_agrees_with_a_long_sampler_run():
    """Every specimen in 6 pools of 16 (one loopy group of 160, 5 %): BP alone is off by more than
    Monte Carlo error here; auto's answer agrees with a long independent sampler run within
    CHECK_Z (5) combined Monte Carlo errors for every specimen."""
    rng = np.random.default_rng(3)
    n = 160
    pools = [perm[j:j + 16] for perm in (rng.permutation(n) for _ in range(6))
             for j in range(0, n, 16)]
    lay = pd.DataFrame([(f"P{t}", f"S{s}") for t, p in enumerate(pools) for s in p],
                       columns=["pool", "sample"])
    x = rng.random(n) < 0.05
    rd = []
    for t, p in enumerate(pools):
        q = float(ASSAY.positive_probability(np.array([16]), np.array([int(x[p].sum())]))[0])
        rd.append((f"P{t}", "positive" if rng.random() < q else "negative"))
    run = Run.from_frames(lay, pd.DataFrame(rd, columns=["pool", "result"]), prevalence=0.05)
    auto = decode(run, ASSAY, seed=1, model_check=False)
    assert set(auto.sample_method) == {"gibbs"}
    long = decode(run, ASSAY, method="gibbs", seed=7, model_check=False,
                  gibbs_options={"min_sweeps": 20000, "max_sweeps": 40000})
    z = np.abs(auto.probability - long.probability) / np.hypot(auto.mcse, long.mcse).clip(1e-9)
    assert z.max() < CHECK_Z, z.max()
    bp = decode(run, ASSAY, method="bp", model_check=False)
    gap = np.abs(bp.probability - auto.probability).max()
    assert abs(auto.diagnostics["loopy_check"]["max_bp_difference"] - gap) < 1e-12
    assert np.abs(bp.probability - long.probability).max() > 0.05  # BP alone is not enough here
