"""The Gibbs sampler against exact enumeration and closed forms.

References: the exact decoder (Gray-code enumeration, itself checked against pgmpy's
VariableElimination in test_exact_vs_pgmpy.py); brute-force sums over all 2^n status vectors written
out here; Beta-binomial conjugacy (Gelman et al., Bayesian Data Analysis, 3rd ed., section 2.4) for
the unknown prevalence.
"""
import itertools

import numpy as np
import pandas as pd
import pytest
from scipy.special import betaln

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.decoders.gibbs import GibbsSampler, SingleSiteMove, run_sampler
from bayespool.errors import ImpossibleEvidenceError
from bayespool.run import Run



def loopy_run(seed, n=16, prevalence=0.08):
    """A random design where every sample sits in two or three pools (many cycles)."""
    rng = np.random.default_rng(seed)
    rows = []
    t = 0
    for _ in range(int(rng.integers(2, 4))):  # two or three random partitions into pools
        perm = rng.permutation(n)
        size = int(rng.integers(3, 6))
        for start in range(0, n, size):
            rows += [{"pool": f"P{t}", "sample": f"S{s}"} for s in perm[start:start + size]]
            t += 1
    layout = pd.DataFrame(rows)
    truth = rng.random(n) < 0.15
    reads = []
    for pool, grp in layout.groupby("pool"):
        members = grp["sample"].str[1:].astype(int).to_numpy()
        for _ in range(int(rng.integers(1, 3))):
            p = 0.92 if truth[members].any() else 0.03
            reads.append({"pool": pool, "result": "positive" if rng.random() < p else "negative"})
    return Run.from_frames(layout, pd.DataFrame(reads), prevalence=prevalence)


ASSAYS = [Assay(0.98, ConstantSensitivity(0.93)),
          Assay(0.995, DilutionSensitivity(se_max=0.97, r50=3.0, slope=1.5))]


@pytest.mark.parametrize("seed", range(6))
def test_marginals_match_exact_enumeration_on_loopy_designs(seed):
    # reference: exact enumeration (bayespool.decoders.exact, checked against pgmpy)
    run = loopy_run(seed)
    assay = ASSAYS[seed % 2]
    exact = decode(run, assay, method="exact")
    assert exact.diagnostics["largest_component"] >= 8  # genuinely loopy, linked design
    post = decode(run, assay, method="gibbs", seed=seed)
    err = np.abs(post.probability - exact.probability)
    assert err.mean() <= 0.01, err
    assert err.max() <= 0.04, err
    assert post.diagnostics["gibbs"]["converged"], post.diagnostics["gibbs"]["stop"]
    # the Monte Carlo errors are honest: errors within a few MCSE
    assert (err <= 5 * post.mcse + 1e-3).all()


def test_hard_constraints_are_exact():
    # Sp = 1: a positive pool has a positive member; Se = 1: a negative pool has none
    # reference: exact enumeration with log 0 counted exactly
    run = loopy_run(11, n=12, prevalence=0.1)
    for assay in (Assay(1.0, ConstantSensitivity(0.9)), Assay(0.97, ConstantSensitivity(1.0))):
        try:
            exact = decode(run, assay, method="exact")
        except ImpossibleEvidenceError:
            with pytest.raises(ImpossibleEvidenceError):
                decode(run, assay, method="gibbs", seed=1)
            continue
        post = decode(run, assay, method="gibbs", seed=1)
        err = np.abs(post.probability - exact.probability)
        assert err.max() <= 0.04 and err.mean() <= 0.01


def test_impossible_readouts_raise():
    # Se = 1 and Sp = 1: A alone negative, B alone negative, but {A, B} positive: no explanation
    layout = pd.DataFrame({"pool": ["P1", "P2", "P3", "P3"], "sample": ["A", "B", "A", "B"]})
    reads = pd.DataFrame({"pool": ["P1", "P2", "P3"], "result": ["negative", "negative",
                                                                  "positive"]})
    run = Run.from_frames(layout, reads, prevalence=0.1)
    with pytest.raises(ImpossibleEvidenceError):
        decode(run, Assay(1.0, ConstantSensitivity(1.0)), method="gibbs", seed=0)


def two_candidates_run():
    """A and B share a pool read positive twice (C, D: a pool read negative, for company)."""
    layout = pd.DataFrame({"pool": ["P1", "P1", "P2", "P2", "P2"],
                           "sample": ["A", "B", "C", "D", "E"]})
    reads = pd.DataFrame({"pool": ["P1", "P1", "P2"],
                          "result": ["positive", "positive", "negative"]})
    return Run.from_frames(layout, reads, prevalence=0.002)


NEAR_PERFECT = Assay(0.999, ConstantSensitivity(0.999))


def test_two_candidates_of_one_positive_pool_share_the_probability():
    # Se = Sp = 0.999: by symmetry and exact enumeration P(A) = P(B) = 1 / (2 - prior) = 0.5 (to
    # 1e-3); single-site updates alone stick in (1, 0) or (0, 1), as crossing passes through (1, 1)
    # (odds about the prior) or (0, 0) (odds about (1 - Sp)^2 / prior); the pool swap crosses
    run = two_candidates_run()
    exact = decode(run, NEAR_PERFECT, method="exact")
    a, b = exact.probability_of("A"), exact.probability_of("B")
    assert abs(a - 0.5) < 1e-3 and abs(b - 0.5) < 1e-3
    post = decode(run, NEAR_PERFECT, method="gibbs", seed=5)
    assert abs(post.probability_of("A") - a) <= 0.02
    assert abs(post.probability_of("B") - b) <= 0.02
    groups = post.diagnostics["ambiguity_groups"]
    assert len(groups) == 1 and groups[0]["samples"] == ["A", "B"]
    assert groups[0]["text"].startswith("exactly one of A, B is positive, probability")
    # brute force: P(exactly one of A, B | readouts)
    assert abs(groups[0]["distribution"][1] - brute_force(run, NEAR_PERFECT)["exactly_one_AB"]) \
        <= 0.02


def test_single_site_alone_sticks_and_the_diagnostics_say_so():
    # the reason for the swap move: without it the chains cannot cross between (1,0) and (0,1);
    # rank-normalised R-hat (Vehtari et al. 2021) must flag it and the run must stop at the cap
    run = two_candidates_run()
    lik_ptr, loglik = run.log_likelihood(NEAR_PERFECT)
    sampler = GibbsSampler(run, lik_ptr, loglik, chains=8, moves=[SingleSiteMove()])
    res = sampler.sample(seed=2, max_sweeps=1000)
    assert not res.converged
    assert res.reason.startswith("stopped at the cap of 1000 sweeps")
    assert res.diagnostics["rhat_max"] > 1.1


def brute_force(run, assay, prevalence_prior=None):
    """Marginals, count distribution and P(exactly one of A, B) by summing all 2^n states."""
    n = run.n_samples
    lik_ptr, loglik = run.log_likelihood(assay)
    states = np.array(list(itertools.product([0, 1], repeat=n)), dtype=np.int64)
    s = states.sum(axis=1)
    if prevalence_prior is None:
        logw = states @ np.log(run.prior) + (1 - states) @ np.log1p(-run.prior)
    else:
        a, b = prevalence_prior
        logw = betaln(a + s, b + n - s) - betaln(a, b)
    for t in range(run.n_pools):
        if run.n_positive[t] + run.n_negative[t] == 0:
            continue
        d = states[:, run.members(t)].sum(axis=1)
        logw = logw + loglik[lik_ptr[t] + d]
    w = np.exp(logw - logw.max())
    w /= w.sum()
    out = {"marginals": w @ states, "counts": np.bincount(s, weights=w, minlength=n + 1)}
    ids = list(run.sample_ids)
    if "A" in ids and "B" in ids:
        ab = states[:, ids.index("A")] + states[:, ids.index("B")]
        out["exactly_one_AB"] = float(w[ab == 1].sum())
    if prevalence_prior is not None:
        a, b = prevalence_prior
        out["prevalence_mean"] = float(w @ ((a + s) / (a + b + n)))
    return out


def test_number_of_positives_matches_exact_enumeration():
    # reference: Posterior.count_distribution of the exact decoder (convolution over components)
    run = loopy_run(3, n=14)
    assay = ASSAYS[0]
    exact = decode(run, assay, method="exact")
    post = decode(run, assay, method="gibbs", seed=9, gibbs_options={"min_sweeps": 6000})
    diff = np.abs(post.count_distribution - exact.count_distribution)
    assert diff.max() <= 0.015, diff
    assert post.positives_summary()["interval_95"] == exact.positives_summary()["interval_95"]
    pos = post.diagnostics["positives_posterior"]
    assert abs(pos["mean"] - exact.probability.sum()) <= 0.05


def test_unknown_prevalence_matches_beta_binomial_enumeration():
    # reference: P(x) = B(a + s, b + n - s) / B(a, b) summed over all 2^n states (conjugacy)
    run = loopy_run(5, n=10)
    assay = ASSAYS[0]
    prior = (2.0, 18.0)
    ref = brute_force(run, assay, prior)
    post = decode(run, assay, method="gibbs", seed=4, gibbs_options={"prevalence_prior": "2,18"})
    err = np.abs(post.probability - ref["marginals"])
    assert err.max() <= 0.04 and err.mean() <= 0.01
    prev = post.diagnostics["prevalence_posterior"]
    assert abs(prev["mean"] - ref["prevalence_mean"]) <= 0.01
    lo, hi = prev["interval_95"]
    assert 0 < lo < prev["mean"] < hi < 1


def test_seed_makes_runs_reproducible():
    run = loopy_run(2)
    a = decode(run, ASSAYS[1], method="gibbs", seed=123)
    b = decode(run, ASSAYS[1], method="gibbs", seed=123)
    c = decode(run, ASSAYS[1], method="gibbs", seed=124)
    assert np.array_equal(a.probability, b.probability)
    assert np.array_equal(a.draws, b.draws)
    assert not np.array_equal(a.probability, c.probability)


def test_draws_are_bounded_joint_samples():
    run = loopy_run(4)
    lik_ptr, loglik = run.log_likelihood(ASSAYS[0])
    res = run_sampler(run, lik_ptr, loglik, seed=1, options={"min_sweeps": 3000,
                                                              "max_draws": 2000})
    assert res.draws.dtype == np.uint8 and res.draws.shape[1] == run.n_samples
    assert 1000 <= len(res.draws) <= 2000
    # each kept draw is a state: its pool counts agree with a status vector (checked via the
    # indicator mean, which must track the Rao-Blackwellised marginal)
    assert np.abs(res.draws.mean(axis=0) - res.probability).max() <= 0.06


def test_auto_falls_back_to_the_sampler_where_bp_does_not_converge():
    # BP given one sweep cannot converge on a loopy group: auto re-decodes it by Gibbs and says so;
    # reference: exact enumeration
    run = loopy_run(6)
    assay = ASSAYS[0]
    exact = decode(run, assay, method="exact")
    post = decode(run, assay, method="auto", seed=3, exact_limit=6, max_sweeps=1)
    assert "gibbs" in post.method
    assert any("decoded by the Gibbs sampler" in w for w in post.warnings)
    assert (post.sample_method == "gibbs").sum() >= 7
    assert post.diagnostics["gibbs"]["converged"] is True
    assert post.diagnostics["converged"] is True
    err = np.abs(post.probability - exact.probability)
    assert err.max() <= 0.04 and err.mean() <= 0.01


def test_bad_options_are_input_errors():
    from bayespool.errors import InputError
    run = loopy_run(1)
    for opts in ({"chains": 0}, {"max_sweeps": 2}, {"prevalence_prior": "1"},
                 {"prevalence_prior": "0,3"}, {"nonsense": 1}):
        with pytest.raises(InputError):
            decode(run, ASSAYS[0], method="gibbs", seed=0, gibbs_options=opts)


def test_large_run_path_watches_only_specimens_near_a_threshold():
    # a memory budget too small to follow every specimen forces the pilot-chosen watch list;
    # reference: exact enumeration as above
    run = loopy_run(7)
    assay = ASSAYS[0]
    exact = decode(run, assay, method="exact")
    lik_ptr, loglik = run.log_likelihood(assay)
    res = run_sampler(run, lik_ptr, loglik, seed=3, options={"memory_budget": 20_000,
                                                              "progress": True})
    assert res.diagnostics["monitored"] < run.n_samples
    undecided = (exact.probability > 0.01) & (exact.probability < 0.99)
    assert np.isfinite(res.rhat[undecided]).all()  # every undecided one is followed
    err = np.abs(res.probability - exact.probability)
    assert err.max() <= 0.04 and err.mean() <= 0.01


def test_unknown_prevalence_takes_auto_to_the_sampler_and_is_refused_by_exact():
    from bayespool.errors import InputError
    run = loopy_run(5, n=10)
    post = decode(run, ASSAYS[0], method="auto", seed=1, gibbs_options={"prevalence_prior": (1, 9)})
    assert post.method == "gibbs" and "prevalence_posterior" in post.diagnostics
    assert any("unknown prevalence" in w for w in post.warnings)
    with pytest.raises(InputError):
        decode(run, ASSAYS[0], method="exact", gibbs_options={"prevalence_prior": (1, 9)})


def test_a_single_chain_can_reach_the_ess_target():
    # split R-hat compares the chain's halves; the batch-mean buffer must be long enough for an
    # ESS of 400 from one chain
    run = loopy_run(8)
    exact = decode(run, ASSAYS[0], method="exact")
    post = decode(run, ASSAYS[0], method="gibbs", seed=2, gibbs_options={"chains": 1})
    assert post.diagnostics["converged"], post.diagnostics["gibbs"]["stop"]
    assert np.abs(post.probability - exact.probability).max() <= 0.04
