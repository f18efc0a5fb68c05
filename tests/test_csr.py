"""The one CSR type: rows, sizes, owners and transposes agree with scipy.sparse on the same pairs,
and every list-of-lists container of the project (run, design, components, candidates, plan)
holds it."""
import numpy as np
import pandas as pd
from scipy import sparse

import bayespool
from bayespool.csr import CSR
from bayespool.decoders.graph import components


def test_rows_and_transpose_match_scipy_sparse():
    rng = np.random.default_rng(4)
    pairs = {(int(r), int(c)) for r, c in rng.integers(0, [30, 50], size=(400, 2))}
    rows, cols = np.array(sorted(pairs)).T
    order = rng.permutation(len(rows))
    rows, cols = rows[order], cols[order]
    m = CSR.from_pairs(rows, cols, 30)
    ref = sparse.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(30, 50))  # scipy's CSR
    assert np.array_equal(m.sizes, np.diff(ref.indptr))
    for r in range(30):
        assert sorted(m.row(r).tolist()) == sorted(ref.indices[ref.indptr[r]:ref.indptr[r + 1]])
        # stable: a row keeps the input order of its pairs
        assert m.row(r).tolist() == cols[rows == r].tolist()
    t = m.transpose(50)
    ref_t = ref.T.tocsr()
    assert np.array_equal(t.sizes, np.diff(ref_t.indptr))
    for c in range(50):
        assert sorted(t.row(c).tolist()) == sorted(ref_t.indices[ref_t.indptr[c]:ref_t.indptr[c + 1]])
    assert np.array_equal(m.owner(), np.repeat(np.arange(30), m.sizes))
    picked = m.take([3, 0])
    assert picked.row(0).tolist() == m.row(3).tolist() and picked.row(1).tolist() == m.row(0).tolist()
    assert len(CSR.from_rows([])) == 0 and CSR.from_rows([]).n_entries == 0


def test_every_container_holds_the_one_csr_type():
    run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
                             "datasets/demo/samples.csv")
    assay = bayespool.read_assay("datasets/demo/assay.toml")
    assert isinstance(run.by_pool, CSR) and isinstance(run.by_sample, CSR)
    assert run.pool_ptr is run.by_pool.ptr and run.sample_pools is run.by_sample.indices
    assert np.array_equal(run.by_pool.transpose(run.n_samples).sizes, run.by_sample.sizes)
    comps = components(run)
    assert isinstance(comps.members, CSR) and isinstance(comps.read_pools, CSR)
    design = bayespool.make_design("array", 24, rows=4, cols=6)
    assert isinstance(design.by_pool, CSR) and design.n_pools == 10
    plan = bayespool.plan(run, assay, tests=2, seed=1)
    assert isinstance(plan.by_pool, CSR) and plan.n_pools == plan.n_tests == 2
    grown = plan.extend(run, [True, False])
    assert grown.n_pools == run.n_pools + 2
    assert grown.members(run.n_pools).tolist() == plan.members(0).tolist()
    lay = grown.layout_frame()
    assert isinstance(lay, pd.DataFrame) and len(lay) == run.n_memberships + plan.n_memberships
