"""``auto`` is exact where it can be and marks where it is not, checked against exact enumeration.

Reference: the exact decoder (Gray-code enumeration, itself checked against pgmpy's
VariableElimination in test_exact.py). The designs and readouts are simulated test fixtures.
"""
import numpy as np
import pandas as pd

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

ASSAY = Assay(0.99, ConstantSensitivity(0.95))


def dense_groups(rng, groups, n_range=(16, 20), w_range=(3, 6), k_range=(5, 10), prevalence=0.05):
    """Independent loopy groups: each specimen in 3-6 pools of 5-10 members of its own group."""
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
            name = f"G{g}P{t}"
            lay += [(name, f"G{g}S{s}") for s in members]
            d = int(x[members].sum())
            p = float(ASSAY.positive_probability(np.array([len(members)]), np.array([d]))[0])
            rd.append((name, "positive" if rng.random() < p else "negative"))
    return Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                           pd.DataFrame(rd, columns=["pool", "result"]), prevalence=prevalence)


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


def test_loopy_groups_left_to_bp_are_marked_and_counted(cli, tmp_path):
    # one loopy group of 30 specimens is above the enumeration limit: BP, marked bp-loopy
    rng = np.random.default_rng(4)
    run = dense_groups(rng, 1, n_range=(30, 30), w_range=(2, 2), k_range=(4, 6))
    post = decode(run, ASSAY)
    assert set(post.sample_method) == {"bp-loopy"}
    assert post.diagnostics["bp_loopy_samples"] == run.n_samples
    assert any("bp-loopy" in w for w in post.warnings)
    frame = post.to_frame()
    assert set(frame["method"]) == {"bp-loopy"}
    # a tree-shaped group (Dorfman: one pool) is exact under BP and is not marked
    tree = Run.from_frames(pd.DataFrame({"pool": ["A"] * 30, "sample": [f"S{i}" for i in range(30)]}),
                           pd.DataFrame({"pool": ["A"], "result": ["positive"]}), prevalence=0.01)
    assert set(decode(tree, ASSAY).sample_method) == {"bp"}
