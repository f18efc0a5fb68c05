"""Decoding with Ct readouts.

References: an independent brute force written here from the model's definition (enumerate every
status vector, integrate the positive specimens' shared individual Cts on a full tensor grid of a
different step), and structural facts of the model (pools that share no specimen are independent
given the statuses, so belief propagation on per-pool Ct likelihoods is exact there).
"""
import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.special import logsumexp

from bayespool.assay import Assay
from bayespool.decoders import decode
from bayespool.run import Run

CT = {"specificity": 0.99, "ct": {
    "cutoff": 40.0, "cycles_per_doubling": 1.0, "noise_sd": 0.5, "detection_max": 0.97,
    "false_positive_low": 32.0,
    "positive": [{"weight": 0.6, "mean": 30.0, "sd": 2.5}, {"weight": 0.4, "mean": 25.0,
                                                          "sd": 2.0}]}}


@pytest.fixture(scope="module")
def assay():
    return Assay.from_dict(CT)


def make_run(pools, readouts, prior):
    lay = pd.DataFrame([(p, s) for p, members in pools.items() for s in members],
                       columns=["pool", "sample"])
    rd = pd.DataFrame(readouts, columns=["pool", "result", "ct"])
    return Run.from_frames(lay, rd, prevalence=prior)


STEPS = {0: 1.0, 1: 0.2, 2: 0.25, 3: 0.4, 4: 0.75}  # full tensor grids stay below 1e7 points


def brute_force(assay, pools, readouts, prior):
    """P(x_i = 1) and E[c_i | x_i = 1] by enumeration and a full tensor grid over the Cts (steps
    from STEPS by the number of positives; the trapezoid rule on these smooth integrands)."""
    m = assay.ct
    specimens = sorted({s for mem in pools.values() for s in mem})

    def prior_grid(step):
        grid = np.arange(min(m.means) - 7 * max(m.sds), max(m.means) + 7 * max(m.sds), step)
        logf = logsumexp([np.log(w) + stats.norm.logpdf(grid, mu, sd)
                          for w, mu, sd in zip(m.weights, m.means, m.sds)], axis=0)
        return grid, logf + np.log(step)

    def pool_term(k, amount, rows):
        # log P(readouts of one pool | amounts), from the model
        if amount is None:
            out = 0.0
            for res, ct in rows:
                if res == "positive":
                    ok = ct == "" or (m.false_positive_low <= float(ct) < m.cutoff)
                    out += np.log(1 - assay.specificity) - (
                        0 if ct == "" else np.log(m.cutoff - m.false_positive_low)) if ok \
                        else -np.inf
                else:
                    out += np.log(assay.specificity)
            return out
        C = np.log2(k) - np.log2(amount)
        out = 0.0
        amp = m.detection_max * stats.norm.cdf((m.cutoff - C) / m.noise_sd)
        for res, ct in rows:
            if res == "positive" and ct != "":
                out = out + np.log(m.detection_max) + stats.norm.logpdf(float(ct), C, m.noise_sd)
            elif res == "positive":
                out = out + np.log(amp)
            else:
                out = out + np.log1p(-amp)
        return out
    by_pool = {p: [(r, c) for q, r, c in readouts if q == p] for p in pools}
    weights, states, marg = [], [], []
    for bits in itertools.product([0, 1], repeat=len(specimens)):
        pos = [s for s, b in zip(specimens, bits) if b]
        q = len(pos)
        grid, logf = prior_grid(STEPS[q])
        lp = sum(np.log(prior) if b else np.log1p(-prior) for b in bits)
        total = np.zeros((len(grid),) * q) if q else np.zeros(())
        for a in range(q):
            shape = [1] * q
            shape[a] = len(grid)
            total = total + logf.reshape(shape)
        for p, mem in pools.items():
            inside = [pos.index(s) for s in mem if s in pos]
            if not inside:
                total = total + pool_term(len(mem), None, by_pool[p])
                continue
            amount = 0.0
            for a in inside:
                shape = [1] * q
                shape[a] = len(grid)
                amount = amount + np.exp2(-grid).reshape(shape)
            total = total + pool_term(len(mem), amount, by_pool[p])
        total = np.broadcast_to(total, (len(grid),) * q)
        weights.append(lp + logsumexp(total))
        states.append(pos)
        means = {}
        for a, s in enumerate(pos):
            mg = logsumexp(total, axis=tuple(b for b in range(q) if b != a)) if q > 1 else total
            if np.isfinite(mg).any():  # else the state is impossible and has weight 0
                w = np.exp(mg - mg.max())
                means[s] = float(w @ grid / w.sum())
        marg.append(means)
    w = np.exp(np.array(weights) - logsumexp(weights))
    prob = {s: sum(wi for wi, st in zip(w, states) if s in st) for s in specimens}
    ct = {s: sum(wi * mg[s] for wi, st, mg in zip(w, states, marg) if s in st and wi > 0)
          / prob[s] for s in specimens}
    return prob, ct


CASES = {
    # a specimen in a pool of three and in a pool of two, with its own and a neighbour's retest
    "linked": ({"P1": ["a", "b", "c"], "P2": ["a", "b"], "P3": ["b"], "P4": ["c"]},
               [("P1", "positive", "29.4"), ("P2", "positive", "29.1"), ("P3", "negative", ""),
                ("P4", "positive", "")], 0.08),
    # a 2 x 2 array: rows and columns read with Cts of two different strengths
    "array": ({"R1": ["a", "b"], "R2": ["c", "d"], "C1": ["a", "c"], "C2": ["b", "d"]},
              [("R1", "positive", "27.2"), ("R2", "positive", "33.0"), ("C1", "positive", "27.0"),
               ("C2", "positive", "33.3")], 0.1),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_exact_ct_against_brute_force(assay, case):
    pools, readouts, prior = CASES[case]
    run = make_run(pools, readouts, prior)
    post = decode(run, assay, method="exact")
    want, want_ct = brute_force(assay, pools, readouts, prior)
    frame = post.to_frame()
    for s, p in want.items():
        assert frame.loc[s, "probability"] == pytest.approx(p, abs=2e-4), s
        if p > 0.05 and not np.isnan(frame.loc[s, "ct_mean"]):
            assert frame.loc[s, "ct_mean"] == pytest.approx(want_ct[s], abs=0.05), s
    assert post.diagnostics["ct"]["ignores_shared_ct"] is False


def test_ct_separates_array_crossings(assay):
    # the binary reading cannot tell the diagonal from the anti-diagonal; matching Cts can
    pools, readouts, prior = CASES["array"]
    run = make_run(pools, readouts, prior)
    p = decode(run, assay, method="exact").to_frame()["probability"]
    assert p["a"] > 0.9 and p["d"] > 0.9 and p["b"] < 0.1 and p["c"] < 0.1
    binary = Assay.from_dict({"specificity": 0.99, "sensitivity": {"model": "constant",
                                                                   "value": 0.97}})
    plain = make_run(pools, [(q, r, "") for q, r, _ in readouts], prior)
    pb = decode(plain, binary, method="exact").to_frame()["probability"]
    assert pb["a"] == pytest.approx(pb["b"], abs=1e-9)


def test_bp_exact_where_no_specimen_is_shared(assay):
    # separate pools (with replicates) share no Ct: per-pool integration is the exact model
    rng = np.random.default_rng(5)
    pools = {f"P{t}": [f"S{t}_{j}" for j in range(6)] for t in range(5)}
    readouts = []
    for t in range(5):
        for _ in range(2):
            hit = rng.random() < 0.5
            readouts.append((f"P{t}", "positive" if hit else "negative",
                             f"{rng.uniform(28, 36):.2f}" if hit and t % 2 else ""))
    run = make_run(pools, readouts, 0.05)
    a = decode(run, assay, method="exact").probability
    b = decode(run, assay, method="bp").probability
    np.testing.assert_allclose(a, b, atol=1e-9)


def test_bp_says_it_ignores_shared_cts(assay):
    pools, readouts, prior = CASES["array"]
    post = decode(make_run(pools, readouts, prior), assay, method="bp")
    assert post.diagnostics["ct"]["ignores_shared_ct"] is True
    assert any("shared" in w for w in post.warnings)


@pytest.mark.parametrize("case", sorted(CASES))
def test_ct_sampler_against_exact(assay, case):
    # the Ct sampler (statuses and shared Cts jointly) against the exact joint enumeration,
    # within Monte Carlo error (4 chains, at least 2000 sweeps, R-hat <= 1.01 and ESS >= 400)
    pools, readouts, prior = CASES[case]
    run = make_run(pools, readouts, prior)
    exact = decode(run, assay, method="exact")
    post = decode(run, assay, method="gibbs", seed=3)
    np.testing.assert_allclose(post.probability, exact.probability, atol=0.015)
    assert post.diagnostics["gibbs"]["max_rhat"] <= 1.05  # rare 0/1 draws: rank R-hat is noisy
    a = exact.to_frame()
    b = post.to_frame()
    sure = a["probability"] > 0.5
    np.testing.assert_allclose(b.loc[sure, "ct_mean"], a.loc[sure, "ct_mean"], atol=0.15)


def test_auto_sends_a_shared_array_to_the_ct_sampler(assay):
    # 4 x 6 array (24 specimens: beyond the exact Ct enumeration), one strong positive
    pools = {**{f"R{r}": [f"S{r}{c}" for c in range(6)] for r in range(4)},
             **{f"C{c}": [f"S{r}{c}" for r in range(4)] for c in range(6)}}
    readouts = [(p, "negative", "") for p in pools]
    readouts[1] = ("R1", "positive", "27.5")
    readouts[4 + 2] = ("C2", "positive", "26.9")
    post = decode(make_run(pools, readouts, 0.02), assay, method="auto", seed=2)
    assert post.diagnostics["decoders"] == {"gibbs": {"components": 1, "samples": 24}}
    frame = post.to_frame()
    assert frame.loc["S12", "probability"] > 0.99
    # pooled Cts 27.5 (row of 6) and 26.9 (column of 4): individual Ct near 25
    assert 24.0 < frame.loc["S12", "ct_mean"] < 26.0
    assert post.diagnostics["ct"]["ignores_shared_ct"] is False


def test_array_brier_script_small():
    # scripts/ct_array_brier.py on a few arrays: reading the Cts must beat the binary reading at
    # the crossings of amplified rows and columns (the full figures come from the script)
    import importlib.util
    from pathlib import Path
    path = Path(__file__).resolve().parents[1] / "scripts" / "ct_array_brier.py"
    spec = importlib.util.spec_from_file_location("ct_array_brier", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    res = mod.study(runs=4, seed=7, sweeps=800)
    b, _ = mod.brier(res["cross_binary"])
    c, _ = mod.brier(res["cross_ct"])
    assert c < 0.5 * b, (c, b)
