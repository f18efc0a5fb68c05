"""The exact decoder against pgmpy's VariableElimination on the same model as a Bayesian network.

Reference (references.md): pgmpy; one node per sample with a Bernoulli prior, one node per readout
whose table is P(positive | members) = 1 - Sp if no member is positive, else Se(k, d).
"""
import itertools
import warnings

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, TableSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

from .conftest import random_design

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from pgmpy.factors.discrete import TabularCPD
    from pgmpy.inference import VariableElimination
    from pgmpy.models import DiscreteBayesianNetwork


def pgmpy_marginals(layout, readouts, prior, assay):
    net = DiscreteBayesianNetwork()
    samples = sorted(layout["sample"].unique())
    net.add_nodes_from(samples)
    cpds = [TabularCPD(s, 2, [[1 - prior[s]], [prior[s]]]) for s in samples]
    evidence = {}
    members = layout.groupby("pool")["sample"].apply(list)
    for r, row in readouts.reset_index(drop=True).iterrows():
        node = f"y{r}"
        parents = members[row["pool"]]
        net.add_node(node)
        net.add_edges_from([(p, node) for p in parents])
        k = len(parents)
        p_pos = []
        for states in itertools.product([0, 1], repeat=k):  # pgmpy: first parent varies slowest
            d = sum(states)
            p_pos.append(float(assay.positive_probability(np.array([k]), np.array([d]))[0]))
        p_pos = np.array(p_pos)
        cpds.append(TabularCPD(node, 2, [1 - p_pos, p_pos], evidence=parents,
                               evidence_card=[2] * k))
        evidence[node] = 1 if row["result"] == "positive" else 0
    net.add_cpds(*cpds)
    infer = VariableElimination(net)
    out = {}
    for s in samples:
        q = infer.query([s], evidence=evidence, show_progress=False)
        out[s] = float(q.values[1])
    return out


def table_assay(rng, max_pool):
    entries = []
    for k in range(1, max_pool + 1):
        for d in sorted(rng.choice(np.arange(1, k + 1), size=min(k, 2), replace=False)):
            entries.append((k, int(d), float(rng.uniform(0.6, 0.99))))
    # make sure every pool size starts at 1 positive
    fixed = []
    for k in range(1, max_pool + 1):
        rows = sorted(e for e in entries if e[0] == k)
        rows[0] = (k, 1, rows[0][2])
        fixed += list(dict(((r[0], r[1]), r) for r in rows).values())
    return Assay(float(rng.uniform(0.85, 0.99)), TableSensitivity(tuple(sorted(fixed))))


@pytest.mark.parametrize("seed", range(20))
def test_exact_matches_pgmpy_variable_elimination(seed):
    rng = np.random.default_rng(1000 + seed)
    n, T = int(rng.integers(3, 9)), int(rng.integers(2, 7))
    layout = random_design(rng, n, T, max_pool=4)
    pools = layout["pool"].unique()
    rows = []
    for t in pools:  # one to three replicate readouts per pool, some pools unread
        for _ in range(int(rng.integers(0, 4))):
            rows.append({"pool": t, "result": "positive" if rng.random() < 0.5 else "negative"})
    readouts = pd.DataFrame(rows, columns=["pool", "result"])
    samples = sorted(layout["sample"].unique())
    prior = {s: float(rng.uniform(0.02, 0.4)) for s in samples}
    assay = table_assay(rng, 4)
    run = Run.from_frames(layout, readouts,
                          pd.DataFrame({"sample": samples, "prior": [prior[s] for s in samples]}))
    post = decode(run, assay, method="exact")
    ref = pgmpy_marginals(layout, readouts, prior, assay)
    for s in samples:
        assert abs(post.probability_of(s) - ref[s]) < 1e-9, (s, post.probability_of(s), ref[s])
