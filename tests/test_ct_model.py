"""The [ct] load model: the assay file, the implied Se(k, d), per-pool likelihoods, readout rules.

Outside references: the model's definition (the issue's formulas, re-implemented here by plain
Monte Carlo and by scipy quadrature, independent of the package's grid), the normal convolution
(a normal individual Ct plus normal noise is normal, so Se(k, 1) has a closed form), and the
dilution law of qPCR (common practice: a 1:k dilution raises Ct by log2 k cycles at 100 %).
"""
import json

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from bayespool.assay import Assay, sensitivity_table
from bayespool.ct_evidence import PoolCtStats, pool_log_likelihood

from .conftest import write_csv

CT_ASSAY = """specificity = 0.995
[ct]
cutoff = 40.0
cycles_per_doubling = 1.0
noise_sd = 0.5
detection_max = 0.98
false_positive_low = 30.0
[[ct.positive]]
weight = 0.7
mean = 31.0
sd = 3.0
[[ct.positive]]
weight = 0.3
mean = 24.0
sd = 2.5
"""


@pytest.fixture
def ct_assay(tmp_path):
    p = tmp_path / "ct.toml"
    p.write_text(CT_ASSAY)
    return Assay.read(p)


def monte_carlo_se(m, k, d, n, rng):
    """Se(k, d) straight from the model's definition (draw Cts, pool, add noise, censor)."""
    comp = rng.choice(len(m.weights), size=(n, d), p=m.weights)
    c = rng.normal(np.take(m.means, comp), np.take(m.sds, comp))
    s = m.cycles_per_doubling
    pool = s * np.log2(k) - s * np.log2(np.exp2(-c / s).sum(axis=1))
    y = pool + rng.normal(0, m.noise_sd, n)
    amp = (rng.random(n) < m.detection_max) & (y < m.cutoff)
    return amp.mean()


@pytest.mark.parametrize("k,d", [(1, 1), (8, 1), (32, 1), (32, 2), (16, 3), (96, 5)])
def test_implied_se_matches_monte_carlo(ct_assay, k, d):
    # reference: Monte Carlo from the definition, 200,000 draws (3 standard errors)
    rng = np.random.default_rng(k * 100 + d)
    n = 200_000
    mc = monte_carlo_se(ct_assay.ct, k, d, n, rng)
    se = float(ct_assay.se(np.array([k]), np.array([d]))[0])
    assert abs(se - mc) <= 3 * np.sqrt(mc * (1 - mc) / n) + 1e-4, (se, mc)


def test_implied_se_single_positive_closed_form(ct_assay):
    # one positive: pooled Ct ~ sum_j w_j N(mu_j + s log2 k, sd_j^2 + noise^2) (normal convolution)
    m = ct_assay.ct
    for k in (1, 4, 32, 200):
        want = m.detection_max * sum(
            w * stats.norm.cdf((m.cutoff - mu - np.log2(k)) / np.hypot(sd, m.noise_sd))
            for w, mu, sd in zip(m.weights, m.means, m.sds))
        assert ct_assay.se(np.array([k]), np.array([1]))[0] == pytest.approx(want, abs=1e-8)


def test_dilution_law_in_the_model(ct_assay):
    # common practice: at 100 % efficiency a 1:k dilution raises the Ct by log2 k (3.32 per 10-fold)
    m = ct_assay.ct
    assert float(m.pool_shift(10)) == pytest.approx(3.3219, abs=1e-4)
    # two equal positives in a pool read one cycle earlier than one of them alone
    assert float(m.combine(30.0, 30.0)) == pytest.approx(29.0)


def _brute_pool_likelihood(m, sp, k, d, cts, n_none, n_unknown):
    """L[d] of one pool by quadrature over the d individual Cts (d <= 2), from the definition: scipy
    quad for one positive, a fine two-dimensional grid for two."""
    s, sd = m.cycles_per_doubling, m.noise_sd

    def readouts(C):
        out = 1.0
        for y in cts:
            out *= m.detection_max * stats.norm.pdf(y, C, sd)
        amp = m.detection_max * stats.norm.cdf((m.cutoff - C) / sd)
        return out * (1 - amp) ** n_none * amp ** n_unknown

    def prior(c):
        return sum(w * stats.norm.pdf(c, mu, q) for w, mu, q in zip(m.weights, m.means, m.sds))
    if d == 1:
        f = lambda c: prior(c) * readouts(s * np.log2(k) + c)  # noqa: E731
        return integrate.quad(f, 0, 70, points=[y - s * np.log2(k) for y in cts], limit=200)[0]
    c = np.arange(2.0, 62.0, 0.03)  # two-dimensional trapezoid rule on a fine grid
    w = prior(c) * 0.03
    pooled = s * np.log2(k) - s * np.log2(2 ** (-c[:, None] / s) + 2 ** (-c[None, :] / s))
    return float(w @ readouts(pooled) @ w)


@pytest.mark.parametrize("cts,n_none,n_unknown", [([33.1], 0, 0), ([33.1, 34.0], 1, 0),
                                                   ([], 1, 1), ([], 2, 0)])
def test_pool_likelihood_against_quadrature(ct_assay, cts, n_none, n_unknown):
    # reference: scipy quad and a fine 2-D grid over the individual Cts of the model
    m, k = ct_assay.ct, 8
    stats_ = PoolCtStats(np.array([len(cts)], float), np.array([sum(cts)], float),
                         np.array([sum(c * c for c in cts)], float),
                         np.array([min(cts, default=np.inf)]), np.array([max(cts, default=-np.inf)]),
                         np.array([n_none], float), np.array([n_unknown], float))
    _, log_l = pool_log_likelihood(ct_assay, np.array([k]), stats_)
    for d in (1, 2):
        want = _brute_pool_likelihood(m, ct_assay.specificity, k, d, cts, n_none, n_unknown)
        assert np.exp(log_l[d]) == pytest.approx(want, rel=1e-3), d
    # no positive member: 1 - Sp per amplification, Ct uniform on [30, 40)
    sp = ct_assay.specificity
    want0 = (1 - sp) ** (len(cts) + n_unknown) * sp ** n_none / 10.0 ** len(cts)
    assert np.exp(log_l[0]) == pytest.approx(want0, rel=1e-12)


def test_ct_outside_false_positive_range_rules_out_no_positive(ct_assay):
    st = PoolCtStats(np.array([1.0]), np.array([25.0]), np.array([625.0]), np.array([25.0]),
                     np.array([25.0]), np.array([0.0]), np.array([0.0]))
    _, log_l = pool_log_likelihood(ct_assay, np.array([4]), st)
    assert log_l[0] == -np.inf and np.all(np.isfinite(log_l[1:]))


def test_round_trip_and_binary_replicates(ct_assay, tmp_path):
    p = tmp_path / "again.toml"
    ct_assay.write(p)
    again = Assay.read(p)
    assert again.ct == ct_assay.ct and "[sensitivity]" not in p.read_text()
    # a single binary readout has P = Se(k, d) exactly: the binary reading of the Ct model
    _, log_l = ct_assay.log_likelihood(np.array([16]), np.array([1]), np.array([0]))
    se = ct_assay.se(np.full(16, 16), np.arange(1, 17))
    np.testing.assert_allclose(np.exp(log_l[1:]), se, rtol=1e-9)


# ---- bad assay files: exit 2, one line naming the file and the key
BAD = {
    "both": (CT_ASSAY + '[sensitivity]\nmodel = "constant"\nvalue = 0.9\n', "[sensitivity]"),
    "cutoff": (CT_ASSAY.replace("cutoff = 40.0", "cutoff = 25.0"), "cutoff"),
    "weights": (CT_ASSAY.replace("weight = 0.3", "weight = 0.4"), "weight"),
    "sd": (CT_ASSAY.replace("sd = 2.5", "sd = 0.0"), "sd"),
    "noise": (CT_ASSAY.replace("noise_sd = 0.5", "noise_sd = -1"), "noise_sd"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_ct_tables_exit_2(cli, tmp_path, case):
    text, key = BAD[case]
    p = tmp_path / "bad.toml"
    p.write_text(text)
    res = cli("assay", p)
    assert res.code == 2
    lines = res.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in res.err
    assert "bad.toml" in lines[0] and key in lines[0], lines[0]
    if case == "both":
        assert "[ct]" in lines[0]


FAMILIES = {
    "constant": 'specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n',
    "dilution": 'specificity = 0.99\n[sensitivity]\nmodel = "dilution"\nse_max = 0.98\n'
                'r50 = 200.0\nslope = 1.5\n',
    "table": 'specificity = 0.99\n[sensitivity]\nmodel = "table"\n[[sensitivity.table]]\n'
             'pool_size = 4\npositives = 1\nvalue = 0.9\n[[sensitivity.table]]\npool_size = 4\n'
             'positives = 2\nvalue = 0.97\n',
    "ct": CT_ASSAY,
}


@pytest.mark.parametrize("family", sorted(FAMILIES))
def test_assay_command_json(cli, tmp_path, family):
    p = tmp_path / "a.toml"
    p.write_text(FAMILIES[family])
    sizes = "4" if family == "table" else "1,4,16"
    res = cli("assay", p, "--pool-sizes", sizes, "--json")
    assert res.code == 0, res.err
    out = json.loads(res.out)
    assert set(out) == {"specificity", "sensitivity"}
    assert out["specificity"] == pytest.approx(0.995 if family == "ct" else 0.99)
    rows = out["sensitivity"]
    assert all(set(r) == {"pool_size", "positives", "value"} for r in rows)
    ks = [int(k) for k in sizes.split(",")]
    assert [(r["pool_size"], r["positives"]) for r in rows] == \
        [(k, d) for k in ks for d in range(1, k + 1)]
    if family == "constant":
        assert all(r["value"] == pytest.approx(0.95) for r in rows)
    if family == "dilution":  # the family's formula from interface.md
        for r in rows:
            want = 0.98 / (1 + (r["pool_size"] / (r["positives"] * 200.0)) ** 1.5)
            assert r["value"] == pytest.approx(want)
    if family == "table":  # step function in positives
        assert [r["value"] for r in rows] == pytest.approx([0.9, 0.97, 0.97, 0.97])
    text = cli("assay", p, "--pool-sizes", sizes)
    assert text.code == 0 and "Se(k, d)" in text.out


def test_table_assay_uncovered_pool_size(cli, tmp_path):
    p = tmp_path / "a.toml"
    p.write_text(FAMILIES["table"])
    res = cli("assay", p, "--pool-sizes", "4,8")
    assert res.code == 2 and "pool size 8" in res.err


def test_binary_consumers_use_the_implied_sensitivity(ct_assay):
    # design closed forms: Kim et al. (2007) with Se = Se(k, d) implied by the Ct model equals the
    # same computation on a table assay holding those very values
    from bayespool.assay import TableSensitivity
    from bayespool.design import optimal_dorfman
    tab = sensitivity_table(ct_assay, list(range(1, 21)))
    table = Assay(ct_assay.specificity, TableSensitivity(tuple(
        (int(r.pool_size), int(r.positives), float(r.value)) for r in tab.itertuples())))
    a = optimal_dorfman(0.02, ct_assay, max_pool_size=20)
    b = optimal_dorfman(0.02, table, max_pool_size=20)
    pd.testing.assert_frame_equal(a.table, b.table, rtol=1e-12)
    # with one lone positive the pooled-then-individual sensitivity is Se(k, 1) * Se(1, 1)
    # (Kim et al. 2007, pooled sensitivity Se^2 when Se is constant)
    row = a.table.set_index("pool_size").loc[1]
    assert row["sensitivity"] == pytest.approx(float(ct_assay.se(np.array([1]), np.array([1]))[0]))


def test_readout_rules(tmp_path, ct_assay):
    from bayespool.ct_evidence import ct_notes
    from bayespool.run import Run
    lay = write_csv(tmp_path / "l.csv", [("P1", "a"), ("P2", "b"), ("P3", "c"), ("P4", "d")],
                    ["pool", "sample"])
    rd = write_csv(tmp_path / "r.csv", [("P1", "positive", "31.5"), ("P2", "positive", ""),
                                         ("P3", "positive", "41.0"), ("P4", "negative", "35.0"),
                                         ("P4", "negative", "")], ["pool", "result", "ct"])
    run = Run.read(lay, rd)
    st = PoolCtStats.from_run(run, ct_assay.ct)
    assert list(st.n_ct) == [1, 0, 0, 0] and list(st.n_unknown) == [0, 1, 0, 0]
    assert list(st.n_none) == [0, 0, 1, 2]
    notes = " ".join(ct_notes(run, ct_assay))
    assert "1 readout(s) with a Ct at or above the cutoff" in notes
    assert "1 negative readout(s) carry a Ct" in notes
    binary = Assay.from_dict({"specificity": 0.99, "sensitivity": {"model": "constant",
                                                                   "value": 0.9}})
    assert "no [ct] table" in " ".join(ct_notes(run, binary))
    bad = write_csv(tmp_path / "bad.csv", [("P1", "positive", "-3")], ["pool", "result", "ct"])
    with pytest.raises(Exception, match="column"):
        Run.read(lay, bad)
