"""Properties of the exact decoder (hypothesis): they follow from the model in design.md."""
import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def runs(draw):
    n = draw(st.integers(1, 7))
    n_pools = draw(st.integers(1, 6))
    rows, reads = [], []
    for t in range(n_pools):
        members = draw(st.sets(st.integers(0, n - 1), min_size=1, max_size=min(n, 4)))
        rows += [{"pool": f"P{t}", "sample": f"S{s}"} for s in sorted(members)]
        for _ in range(draw(st.integers(0, 2))):
            reads.append({"pool": f"P{t}", "result": draw(st.sampled_from(["positive", "negative"]))})
    priors = draw(st.lists(st.floats(0.01, 0.6), min_size=n, max_size=n))
    se = draw(st.floats(0.5, 0.99))
    sp = draw(st.floats(0.8, 0.99))
    dilution = draw(st.booleans())
    sens = DilutionSensitivity(se, 3.0, 1.2) if dilution else ConstantSensitivity(se)
    layout = pd.DataFrame(rows)
    readouts = pd.DataFrame(reads, columns=["pool", "result"])
    used = sorted(layout["sample"].unique())
    samples = pd.DataFrame({"sample": used, "prior": [priors[int(s[1:])] for s in used]})
    return layout, readouts, samples, Assay(sp, sens)


def probs(layout, readouts, samples, assay):
    post = decode(Run.from_frames(layout, readouts, samples), assay, method="exact")
    return dict(zip(post.sample_ids, post.probability)), post


@SETTINGS
@given(runs())
def test_probabilities_are_probabilities(case):
    p, post = probs(*case)
    assert all(0.0 <= v <= 1.0 for v in p.values())
    assert abs(post.count_distribution.sum() - 1.0) < 1e-9


@SETTINGS
@given(runs(), st.randoms(use_true_random=False))
def test_relabelling_and_reordering_change_nothing(case, rnd):
    layout, readouts, samples, assay = case
    base, _ = probs(layout, readouts, samples, assay)
    names = sorted(base)
    new = dict(zip(names, rnd.sample([f"X{i}" for i in range(100)], len(names))))
    pools = sorted(layout["pool"].unique())
    pnew = dict(zip(pools, rnd.sample([f"Q{i}" for i in range(100)], len(pools))))
    lay2 = layout.assign(sample=layout["sample"].map(new), pool=layout["pool"].map(pnew))
    lay2 = lay2.sample(frac=1.0, random_state=rnd.randint(0, 10**6))
    rd2 = readouts.assign(pool=readouts["pool"].map(pnew)).sample(frac=1.0, random_state=1)
    sm2 = samples.assign(sample=samples["sample"].map(new)).iloc[::-1]
    other, _ = probs(lay2, rd2, sm2, assay)
    for s in names:
        assert abs(base[s] - other[new[s]]) < 1e-12


@SETTINGS
@given(runs())
def test_a_pool_with_no_readout_changes_nothing(case):
    layout, readouts, samples, assay = case
    base, _ = probs(layout, readouts, samples, assay)
    extra = pd.DataFrame({"pool": "UNREAD", "sample": samples["sample"].iloc[:3]})
    more, _ = probs(pd.concat([layout, extra]), readouts, samples, assay)
    for s in base:
        assert abs(base[s] - more[s]) < 1e-12


@SETTINGS
@given(runs())
def test_two_replicates_equal_one_factor_with_the_product_likelihood(case):
    # Readouts are independent given the statuses (design.md), so two replicate rows of one pool
    # must give the same posterior as one factor L[d] = P(y1 | d) P(y2 | d) built by hand.
    layout, readouts, samples, assay = case
    if readouts.empty:
        return
    pool = readouts["pool"].iloc[0]
    doubled = pd.concat([readouts, readouts.iloc[[0]]])
    p2, _ = probs(layout, doubled, samples, assay)
    run = Run.from_frames(layout, readouts, samples)
    ptr, ll = run.log_likelihood(assay)
    t = int(np.flatnonzero(run.pool_ids == pool)[0])
    k = int(run.pool_size[t])
    d = np.arange(k + 1)
    pp = assay.positive_probability(np.full(k + 1, k), d)
    one = pp if readouts["result"].iloc[0] == "positive" else 1 - pp
    ll = ll.copy()
    with np.errstate(divide="ignore"):
        ll[ptr[t]:ptr[t + 1]] += np.log(one)
    from bayespool.decoders.exact import decode_exact
    from bayespool.decoders.graph import components
    prob, *_ = decode_exact(run, ptr, ll, components(run))
    for i, s in enumerate(run.sample_ids):
        assert abs(prob[i] - p2[s]) < 1e-12
