"""Calibration of the Ct load model from validation readouts with Cts.

References: the dilution law of qPCR (common practice: a 1:k dilution raises the Ct by log2 k
cycles at 100 % efficiency, 3.32 per ten-fold) and the pooled-Ct rises reported by Park (2022),
Dryad doi:10.5061/dryad.n5tb2rc04: 1.92 to 2.41 cycles in 5:1 pools and 3.03 to 3.29 in 10:1 pools
(against log2 5 = 2.32 and log2 10 = 3.32); interval coverage against the simulation's truth.
"""
import json

import numpy as np
import pandas as pd
import pytest

from bayespool.calibration.ct_fit import fit_dilution, fit_mixture


def simulate(rng, n, s=1.0, sd=0.5, dm=0.97, cutoff=40.0, sizes=(1, 4, 8, 16, 32)):
    k = rng.choice(sizes, n)
    comp = rng.random(n) < 0.7
    ind = np.where(comp, rng.normal(30, 3, n), rng.normal(24, 2, n))
    y = ind + s * np.log2(k) + rng.normal(0, sd, n)
    hit = (rng.random(n) < dm) & (y < cutoff)
    return k, ind, np.where(hit, y, np.nan)


def test_recovers_parameters_with_coverage():
    # 200 simulated validation sets of 150 one-positive readouts: 95 % Wald intervals cover the
    # true cycles_per_doubling and noise_sd about 95 % of the time (binomial sd 1.5 points)
    rng = np.random.default_rng(11)
    cover = {"cycles_per_doubling": 0, "noise_sd": 0}
    truth = {"cycles_per_doubling": 1.0, "noise_sd": 0.5}
    n_sets = 200
    for _ in range(n_sets):
        est = fit_dilution(*simulate(rng, 150), cutoff=40.0)
        for name, true in truth.items():
            cover[name] += est[name][1] <= true <= est[name][2]
    for name in cover:
        assert 0.90 <= cover[name] / n_sets <= 0.99, (name, cover[name])
    est = fit_dilution(*simulate(rng, 3000), cutoff=40.0)
    assert est["cycles_per_doubling"][0] == pytest.approx(1.0, abs=0.02)
    assert est["noise_sd"][0] == pytest.approx(0.5, abs=0.03)
    assert est["detection_max"][0] == pytest.approx(0.97, abs=0.015)


def test_mixture_chosen_by_bic_recovers_components():
    rng = np.random.default_rng(3)
    x = np.concatenate([rng.normal(30, 3, 1400), rng.normal(22, 1.5, 600)])
    w, m, sd, bic = fit_mixture(x)
    assert len(w) == 2 and min(bic, key=bic.get) == 2
    np.testing.assert_allclose(m, [22, 30], atol=0.3)
    np.testing.assert_allclose(sd, [1.5, 3], atol=0.3)
    np.testing.assert_allclose(w, [0.3, 0.7], atol=0.04)


def test_dilution_law_park_2022_shifts():
    # pooled-Ct rises spread over Park (2022)'s reported ranges at 5:1 and 10:1 pools; the fitted
    # cycles_per_doubling lands near 1 (common practice: log2 k per 1:k dilution)
    rng = np.random.default_rng(2022)
    n = 400
    k = np.repeat([5, 10], n // 2)
    ind = rng.normal(27, 3, n)
    shift = np.where(k == 5, rng.uniform(1.92, 2.41, n), rng.uniform(3.03, 3.29, n))
    est = fit_dilution(k, ind, ind + shift, cutoff=40.0)
    s = est["cycles_per_doubling"][0]
    assert 0.85 <= s <= 1.05, s
    # the same shifts against log2 k: 2.17 / 2.32 and 3.16 / 3.32, both within 0.85..1.05
    assert 0.85 <= 2.165 / np.log2(5) <= 1.05 and 0.85 <= 3.16 / np.log2(10) <= 1.05


def test_calibrate_cli_writes_a_ct_assay(cli, tmp_path):
    rng = np.random.default_rng(4)
    k, ind, y = simulate(rng, 300)
    rows = [(kk, 1, "positive" if np.isfinite(v) else "negative",
             f"{v:.2f}" if np.isfinite(v) else "", f"{c:.2f}") for kk, c, v in zip(k, ind, y)]
    neg = [(8, 0, "negative", "", "")] * 396 + [(8, 0, "positive", "35.5", "")] * 4
    frame = pd.DataFrame(rows + neg, columns=["pool_size", "positives", "result", "ct",
                                              "individual_ct"])
    path = tmp_path / "validation.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "ct.toml"
    res = cli("calibrate", "--validation", path, "--out", out, "--json")
    assert res.code == 0, res.err
    summary = json.loads(res.out)
    assert summary["parameters"]["specificity"]["estimate"] == pytest.approx(0.99)
    assert summary["mixture_selection"] == "BIC"
    res = cli("assay", out, "--json")
    assert res.code == 0 and "[ct]" in out.read_text()
    frame.drop(columns=["individual_ct"]).to_csv(path, index=False)
    bad = cli("calibrate", "--validation", path, "--out", tmp_path / "x.toml")
    assert bad.code == 2 and "individual_ct" in bad.err
