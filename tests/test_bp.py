"""Belief propagation against the exact decoder and against the definition of its messages.

References: BP (sum-product) is exact on graphs without cycles (Pearl 1988, Probabilistic Reasoning
in Intelligent Systems; Kschischang, Frey & Loeliger 2001, Factor graphs and the sum-product
algorithm, IEEE Trans. Inf. Theory 47(2)); a factor-to-variable message is, by definition, the sum
over the other variables' states of the factor times their incoming beliefs (same paper, eq. 6).
The exact decoder itself is checked against pgmpy in test_exact_vs_pgmpy.py.
"""
import itertools

import numpy as np
import pytest
from scipy.special import logsumexp

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity, TableSensitivity
from bayespool.decoders import decode
from bayespool.decoders.bp import pool_messages
from bayespool.errors import ImpossibleEvidenceError
from bayespool.run import Run

ASSAYS = {
    "constant": Assay(0.98, ConstantSensitivity(0.92)),
    "dilution": Assay(0.97, DilutionSensitivity(0.99, 3.0, 1.4)),
    "table": Assay(0.96, TableSensitivity(tuple(
        (k, d, v) for k in range(1, 7) for d, v in ((1, 0.7 + 0.02 * k), (2, 0.9), (3, 0.97))
        if d <= k))),
    "perfect_sp": Assay(1.0, DilutionSensitivity(0.95, 4.0, 1.2)),
    "perfect_se": Assay(0.97, ConstantSensitivity(1.0)),
}


def simulate_readouts(rng, pool_of, sample_of, n, n_pools, assay, prior, replicates=(0, 3)):
    """Readouts drawn from a hidden truth (so hard constraints are always satisfiable)."""
    truth = rng.random(n) < prior
    k = np.bincount(pool_of, minlength=n_pools)
    d = np.bincount(pool_of, weights=truth[sample_of], minlength=n_pools).astype(int)
    rp, rr = [], []
    for t in range(n_pools):
        for _ in range(int(rng.integers(replicates[0], replicates[1] + 1))):
            rp.append(t)
            rr.append(int(assay.draw_readouts(np.array([k[t]]), np.array([d[t]]), rng)[0]))
    return np.array(rp, dtype=np.int64), np.array(rr, dtype=np.int64)


def tree_run(rng, assay, n_pools):
    """Every new pool shares exactly one specimen with the pools before it."""
    pool_of, sample_of, n = [], [], 0
    for t in range(n_pools):
        members = [int(rng.integers(0, n))] if t else []
        for _ in range(int(rng.integers(1, 5))):
            members.append(n)
            n += 1
        pool_of += [t] * len(members)
        sample_of += members
    pool_of, sample_of = np.array(pool_of), np.array(sample_of)
    prior = rng.uniform(0.02, 0.3, n)
    rp, rr = simulate_readouts(rng, pool_of, sample_of, n, n_pools, assay, prior, (1, 3))
    return Run.from_arrays(pool_of, sample_of, n, n_pools, prior, rp, rr)


def loopy_run(rng, assay, n=16, k=4, rounds=2, prevalence=0.1):
    """Every specimen in ``rounds`` pools: each round a random partition into pools of ``k``."""
    pool_of, sample_of = [], []
    for r in range(rounds):
        perm = rng.permutation(n)
        pool_of.append(r * (n // k) + np.arange(n) // k)
        sample_of.append(perm)
    pool_of, sample_of = np.concatenate(pool_of), np.concatenate(sample_of)
    n_pools = rounds * (n // k)
    rp, rr = simulate_readouts(rng, pool_of, sample_of, n, n_pools, assay,
                               np.full(n, prevalence), (1, 1))
    return Run.from_arrays(pool_of, sample_of, n, n_pools, prevalence, rp, rr)


@pytest.mark.parametrize("name", sorted(ASSAYS))
@pytest.mark.parametrize("seed", range(6))
def test_bp_equals_exact_on_trees(name, seed):
    # BP is exact on trees (Pearl 1988; Kschischang et al. 2001)
    rng = np.random.default_rng(500 + seed)
    assay = ASSAYS[name]
    run = tree_run(rng, assay, n_pools=int(rng.integers(2, 6)))
    exact = decode(run, assay, method="exact")
    bp = decode(run, assay, method="bp", tolerance=1e-12)
    assert bp.diagnostics["converged"]
    assert np.all(np.isfinite(bp.probability))
    np.testing.assert_allclose(bp.probability, exact.probability, rtol=0, atol=1e-8)


def test_bp_equals_exact_on_trees_with_damping_and_default_tolerance():
    rng = np.random.default_rng(77)
    assay = ASSAYS["dilution"]
    for _ in range(5):
        run = tree_run(rng, assay, n_pools=5)
        exact = decode(run, assay, method="exact")
        for damping in (0.0, 0.5):
            bp = decode(run, assay, method="bp", damping=damping)
            assert bp.diagnostics["converged"]
            np.testing.assert_allclose(bp.probability, exact.probability, atol=1e-8)


def test_loopy_designs_two_pools_per_specimen_error_against_exact(capsys):
    # Loopy BP is approximate; on small random designs with every specimen in two pools of four
    # its mean absolute error against exact enumeration must stay at most 0.015.
    rows = []
    for name in ("constant", "dilution", "table", "perfect_sp"):
        assay = ASSAYS[name]
        errors = []
        for seed in range(25):
            run = loopy_run(np.random.default_rng(900 + seed), assay, n=16, k=4)
            exact = decode(run, assay, method="exact")
            bp = decode(run, assay, method="bp")
            assert bp.diagnostics["converged"], (name, seed)
            errors.append(np.abs(bp.probability - exact.probability))
        err = np.concatenate(errors)
        rows.append((name, err.mean(), err.max()))
    with capsys.disabled():
        print("\nloopy BP vs exact (16 specimens, 2 pools of 4 each, 25 designs per assay):")
        for name, mean, worst in rows:
            print(f"  {name:<11} mean abs error {mean:.4f}  max abs error {worst:.4f}")
    for name, mean, _ in rows:
        assert mean <= 0.015, name


def brute_force_message(log_l, incoming):
    """log P(y | x_i = 1) - log P(y | x_i = 0), summing over the other members' states
    (definition of the factor-to-variable message, Kschischang et al. 2001), in logs."""
    k = len(incoming)
    log_q = -np.logaddexp(0.0, -np.asarray(incoming))   # log P(x_j = 1)
    log_qb = -np.logaddexp(0.0, np.asarray(incoming))   # log P(x_j = 0)
    out = np.empty(k)
    for i in range(k):
        others = [j for j in range(k) if j != i]
        terms = {0: [], 1: []}
        for states in itertools.product((0, 1), repeat=len(others)):
            w = sum(log_q[j] if s else log_qb[j] for j, s in zip(others, states))
            for v in (0, 1):
                terms[v].append(w + log_l[v + sum(states)])
        out[i] = logsumexp(terms[1]) - logsumexp(terms[0])
    return out


@pytest.mark.parametrize("seed", range(12))
def test_single_pool_table_sensitivity_message_equals_brute_force(seed):
    rng = np.random.default_rng(seed)
    k = int(rng.integers(1, 8))
    table = []
    for d in sorted(rng.choice(np.arange(1, k + 1), size=min(k, 3), replace=False)):
        table.append((k, int(d), float(rng.uniform(0.5, 0.99))))
    table[0] = (k, 1, table[0][2])
    assay = Assay(float(rng.uniform(0.9, 0.999)), TableSensitivity(tuple(table)))
    npos, nneg = int(rng.integers(0, 3)), int(rng.integers(0, 3))
    _, log_l = assay.log_likelihood(np.array([k]), np.array([npos]), np.array([nneg]))
    incoming = rng.normal(-2.0, 3.0, k)
    expected = brute_force_message(log_l, incoming)
    np.testing.assert_allclose(pool_messages(log_l, incoming), expected, rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(pool_messages(log_l, incoming, path="general"), expected,
                               rtol=1e-10, atol=1e-10)


@pytest.mark.parametrize("seed", range(8))
def test_constant_path_equals_general_path_and_brute_force(seed):
    # the O(k) path when L[1] = ... = L[k] against the O(k^2) path and the definition
    rng = np.random.default_rng(40 + seed)
    k = int(rng.integers(1, 10))
    assay = ASSAYS["constant"]
    _, log_l = assay.log_likelihood(np.array([k]), np.array([int(rng.integers(0, 3))]),
                                    np.array([int(rng.integers(0, 3))]))
    incoming = rng.normal(-1.0, 4.0, k)
    fast = pool_messages(log_l, incoming)
    np.testing.assert_allclose(fast, pool_messages(log_l, incoming, path="general"), atol=1e-10)
    np.testing.assert_allclose(fast, brute_force_message(log_l, incoming), atol=1e-10)


@pytest.mark.parametrize("scale", [50.0, 300.0, 700.0])
def test_messages_with_extreme_log_odds_stay_finite_and_exact(scale):
    # log-odds far beyond the range where P(x = 0) = 1 - P(x = 1) is representable; the log-domain
    # brute force (scipy logsumexp) is the reference
    rng = np.random.default_rng(int(scale))
    for _ in range(5):
        k = 5
        incoming = rng.choice([-scale, scale, -2.0, 1.0], size=k)
        for log_l in (np.log([0.99] + [0.05] * k), np.log([0.01] + [0.95] * k),
                      np.array([-40.0 * 3] + [-0.1] * k)):
            expected = brute_force_message(log_l, incoming)
            for path in ("auto", "general"):
                got = pool_messages(log_l, incoming, path=path)
                assert np.all(np.isfinite(got))
                np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9)


def test_hard_constraints_give_infinite_messages_not_nan():
    # Sp = 1 and a positive readout: when every other member is known negative, x_i must be 1
    log_l = np.array([-np.inf, np.log(0.9), np.log(0.9), np.log(0.9)])
    out = pool_messages(log_l, np.array([-np.inf, -np.inf, 0.3]))
    assert out[2] == np.inf and np.all(np.isfinite(out[:2]))
    # Se = 1 and a negative readout: no member can be positive
    log_l = np.array([np.log(0.97), -np.inf, -np.inf])
    assert np.all(pool_messages(log_l, np.array([0.5, -3.0])) == -np.inf)
    with pytest.raises(ValueError):  # a known positive member in that pool: impossible
        pool_messages(log_l, np.array([np.inf, -3.0]))


def test_hard_constraints_on_loopy_designs_are_exact_for_forced_specimens():
    # Se = 1: every member of a negative pool is negative with certainty, as exact enumeration says
    assay = ASSAYS["perfect_se"]
    errors = []
    for seed in range(20):
        run = loopy_run(np.random.default_rng(300 + seed), assay, n=16, k=4)
        exact = decode(run, assay, method="exact")
        bp = decode(run, assay, method="bp")
        assert np.all(np.isfinite(bp.probability))
        cleared = exact.probability == 0.0
        assert np.all(bp.probability[cleared] == 0.0)
        errors.append(np.abs(bp.probability - exact.probability))
    assert np.concatenate(errors).mean() <= 0.015


def test_impossible_hard_evidence_is_an_error_not_nan():
    # Se = 1 and Sp = 1: specimen 0 alone reads positive, but a pool holding it reads negative
    assay = Assay(1.0, ConstantSensitivity(1.0))
    run = Run.from_arrays([0, 1, 1, 2, 2], [0, 0, 1, 1, 2], 3, 3, 0.1,
                          [0, 1, 2], [1, 0, 1])
    with pytest.raises(ImpossibleEvidenceError):
        decode(run, assay, method="bp")
    with pytest.raises(ImpossibleEvidenceError):
        decode(run, assay, method="exact")


def test_non_convergence_is_reported_loudly():
    assay = ASSAYS["constant"]
    run = loopy_run(np.random.default_rng(5), assay, n=64, k=8, rounds=3, prevalence=0.2)
    post = decode(run, assay, method="bp", max_sweeps=1)
    d = post.diagnostics
    assert d["converged"] is False and d["sweeps"] == 1 and d["residual"] > 0
    assert any(w.startswith("WARNING: belief propagation did not converge") for w in post.warnings)
    ok = decode(run, assay, method="bp")
    assert ok.diagnostics["converged"] and ok.diagnostics["residual"] < 1e-8
    assert not any("did not converge" in w for w in ok.warnings)


def test_auto_decodes_small_groups_exactly_and_large_ones_by_bp():
    assay = ASSAYS["dilution"]
    rng = np.random.default_rng(11)
    big = loopy_run(rng, assay, n=64, k=8, rounds=2)          # one group of 64 specimens
    small = loopy_run(rng, assay, n=8, k=4, rounds=2)          # a small loopy group
    pool_of = np.concatenate([np.repeat(np.arange(big.n_pools), big.pool_size),
                              big.n_pools + np.repeat(np.arange(small.n_pools), small.pool_size)])
    sample_of = np.concatenate([big.pool_members, big.n_samples + small.pool_members])
    rp = np.concatenate([np.repeat(np.arange(big.n_pools), big.pool_reads),
                         big.n_pools + np.repeat(np.arange(small.n_pools),
                                                 small.pool_reads)])
    rr = np.concatenate([np.concatenate([[1] * a + [0] * b for a, b in
                                         zip(big.n_positive, big.n_negative)]),
                         np.concatenate([[1] * a + [0] * b for a, b in
                                         zip(small.n_positive, small.n_negative)])])
    n = big.n_samples + small.n_samples
    run = Run.from_arrays(pool_of, sample_of, n, big.n_pools + small.n_pools, 0.1, rp, rr)
    # by default the big loopy group is re-decoded by the sampler (tests/test_auto_loopy.py);
    # without it (loopy_sampler_limit=0) BP's answer is kept and marked
    sampled = decode(run, assay, method="auto", seed=1)
    assert set(sampled.sample_method[:64]) == {"gibbs"} and sampled.method == "exact+gibbs"
    post = decode(run, assay, method="auto", loopy_sampler_limit=0)
    assert post.method == "exact+bp"
    method = post.sample_method
    # the big group is loopy: BP stays approximate there and the method column says so
    assert set(method[:64]) == {"bp-loopy"} and set(method[64:]) == {"exact"}
    assert post.diagnostics["bp_loopy_samples"] == 64
    assert post.diagnostics["decoders"] == {"exact": {"components": 1, "samples": 8},
                                            "bp": {"components": 1, "samples": 64}}
    assert "exact for 1 group" in post.diagnostics["choice"]
    assert "bp for 1 group" in post.diagnostics["choice"]
    # the small group's answer is exact
    small_exact = decode(small, assay, method="exact")
    np.testing.assert_allclose(post.probability[64:], small_exact.probability, atol=1e-12)
    assert post.log_evidence is None and post.count_distribution is None


def test_auto_keeps_exact_results_when_all_groups_are_small():
    assay = ASSAYS["table"]
    run = loopy_run(np.random.default_rng(3), assay, n=16, k=4)
    auto = decode(run, assay)
    exact = decode(run, assay, method="exact")
    assert auto.method == "exact"
    np.testing.assert_array_equal(auto.probability, exact.probability)
    assert auto.log_evidence == exact.log_evidence
    assert auto.diagnostics["converged"] is True and auto.diagnostics["sweeps"] == 0
