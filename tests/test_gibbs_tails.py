"""The sampler's Monte Carlo errors at the tails, against exact answers.

References: Bayes' rule in closed form for one positive pool of independent members with a constant
sensitivity, P(x_i = 1 | y) = p Se / (Se (1 - (1 - p)^k) + (1 - Sp) (1 - p)^k); the exact decoder
(Gray-code enumeration, itself checked against pgmpy in test_exact.py) for many small groups.
The designs and readouts are simulated test fixtures.
"""
import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

BANDS = [("below 0.01", 0.0, 0.01), ("0.01 to 0.1", 0.01, 0.1), ("0.1 to 0.9", 0.1, 0.9),
         ("0.9 to 0.99", 0.9, 0.99), ("above 0.99", 0.99, 1.0 + 1e-12)]


def by_sample(frame):
    return frame.set_index("sample") if "sample" in frame.columns else frame


def test_one_positive_pool_of_500_is_within_its_mcse():
    k, p, se, sp = 500, 0.01, 0.95, 0.99
    q = (1 - p) ** k
    exact = p * se / (se * (1 - q) + (1 - sp) * q)  # 0.010065...
    assert exact == pytest.approx(0.01007, abs=5e-6)
    lay = pd.DataFrame({"pool": ["P"] * k, "sample": [f"S{i}" for i in range(k)]})
    run = Run.from_frames(lay, pd.DataFrame({"pool": ["P"], "result": ["positive"]}),
                          prevalence=p)
    post = by_sample(decode(run, Assay(sp, ConstantSensitivity(se)), method="gibbs",
                           seed=1).to_frame())
    assert (post["mcse"] > 0).all()
    # each specimen's estimate within 3 of its MCSE; the mean within 3 MCSE of the mean
    assert (np.abs(post["probability"] - exact) <= 3 * post["mcse"]).all()
    assert abs(post["probability"].mean() - exact) <= 3 * post["mcse"].mean()


def dorfman_groups(rng, groups, k, p, assay):
    """Dorfman screening: pools of k, every member of a positive pool retested alone."""
    lay, rd = [], []
    se1 = float(assay.se(np.array([1]), np.array([1]))[0])
    for g in range(groups):
        x = rng.random(k) < p
        pool = f"G{g}"
        lay += [(pool, f"S{g}_{i}") for i in range(k)]
        d = int(x.sum())
        pr = float(assay.se(np.array([k]), np.array([max(d, 1)]))[0]) if d else 1 - assay.specificity
        if rng.random() < pr:
            rd.append((pool, "positive"))
            for i in range(k):
                lay.append((f"R{g}_{i}", f"S{g}_{i}"))
                hit = rng.random() < (se1 if x[i] else 1 - assay.specificity)
                rd.append((f"R{g}_{i}", "positive" if hit else "negative"))
        else:
            rd.append((pool, "negative"))
    return pd.DataFrame(lay, columns=["pool", "sample"]), pd.DataFrame(rd, columns=["pool", "result"])


def random_groups(rng, groups, n, pools, size, p, assay):
    """Small loopy groups: n specimens, pools of ``size`` drawn at random."""
    lay, rd = [], []
    for g in range(groups):
        x = rng.random(n) < p
        for t in range(pools):
            members = rng.choice(n, size=size, replace=False)
            lay += [(f"G{g}P{t}", f"S{g}_{i}") for i in members]
            d = int(x[members].sum())
            pr = float(assay.se(np.array([size]), np.array([max(d, 1)]))[0]) if d else \
                1 - assay.specificity
            rd.append((f"G{g}P{t}", "positive" if rng.random() < pr else "negative"))
    return pd.DataFrame(lay, columns=["pool", "sample"]), pd.DataFrame(rd, columns=["pool", "result"])


def z_scores(layout, readouts, assay, prevalence, seed):
    run = Run.from_frames(layout, readouts, prevalence=prevalence)
    exact = by_sample(decode(run, assay, method="exact").to_frame())["probability"]
    post = by_sample(decode(run, assay, method="gibbs", seed=seed).to_frame())
    return exact.to_numpy(), post["probability"].to_numpy(), post["mcse"].to_numpy()


def test_error_over_mcse_in_every_probability_band():
    rng = np.random.default_rng(2024)
    dil = Assay(0.995, DilutionSensitivity(0.99, 30.0, 1.5))
    const = Assay(0.99, ConstantSensitivity(0.95))
    parts = [z_scores(*dorfman_groups(rng, 40, 16, 0.03, dil), dil, 0.05, 1),
             z_scores(*random_groups(rng, 15, 12, 6, 4, 0.1, const), const, 0.05, 2)]
    exact = np.concatenate([a[0] for a in parts])
    est = np.concatenate([a[1] for a in parts])
    err = np.concatenate([a[2] for a in parts])
    moved = (exact > 0) & (exact < 1)
    assert (err[moved] > 0).all()  # never 0 for a probability strictly inside (0, 1)
    z = np.abs(est - exact) / err
    seen = 0
    for name, lo, hi in BANDS:
        band = (exact >= lo) & (exact < hi)
        if band.sum() < 5:
            continue
        seen += 1
        # standard normal: P(|z| > 3) = 0.0027; allow a little Monte Carlo slack, never a tail
        # of wild values (before this check the tails reached |z| in the hundreds)
        assert (z[band] > 3).mean() <= 0.01, name
        assert np.median(z[band]) < 1.0, name
    assert seen >= 4
