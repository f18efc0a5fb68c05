"""The report's Ct sections: pools with their Ct readouts, each specimen's estimated Ct, the
implied sensitivity, and a Ct calibration's observed against fitted pool Cts.

References: the readouts file itself (every Ct shown is one that was read), the posterior's own
columns (the report computes nothing), the model's definition by Monte Carlo for the implied
sensitivity (draw individual Cts from the mixture, add s log2 k, the noise, the detection and the
cutoff), and the dilution law of qPCR (common practice: a 1:k dilution raises the Ct by log2 k
cycles at 100 % efficiency).
"""
import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay
from bayespool.decoders import decode
from bayespool.report import build_report
from bayespool.run import Run

from .test_report_dom import parse

CT = {"specificity": 0.995, "ct": {
    "cutoff": 40.0, "cycles_per_doubling": 1.0, "noise_sd": 0.5, "detection_max": 0.98,
    "false_positive_low": 32.0,
    "positive": [{"weight": 0.6, "mean": 29.0, "sd": 3.0}, {"weight": 0.4, "mean": 23.0,
                                                          "sd": 2.0}]}}


@pytest.fixture(scope="module")
def assay():
    return Assay.from_dict(CT)


def dorfman_run():
    """Three pools of four; P1 amplified and its members were read alone (invented readouts)."""
    lay = [(f"P{b}", f"S{b}{j}") for b in range(3) for j in range(4)]
    lay += [(f"I{j}", f"S1{j}") for j in range(4)]
    rd = [("P0", "negative", ""), ("P1", "positive", "30.4"), ("P1", "positive", "30.9"),
          ("P2", "negative", ""), ("I0", "positive", "28.6"), ("I1", "negative", ""),
          ("I2", "negative", ""), ("I3", "positive", "")]
    return Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                           pd.DataFrame(rd, columns=["pool", "result", "ct"]), prevalence=0.05)


def has(name):
    return lambda value: name in value.split()


def rows_of(table):
    head = [th.attrs["data-key"] for th in table.find_all("th") if th.attrs.get("scope") == "col"]
    out = []
    for tr in table.find("tbody").find_all("tr"):
        cells = [c for c in tr.children if getattr(c, "tag", None) in ("td", "th")]
        out.append(dict(zip(head, cells)))
    return out


def test_ct_section_shows_the_read_cts_and_the_posterior_estimates(assay):
    run = dorfman_run()
    post = decode(run, assay)
    dom = parse(build_report(run=run, assay=assay, posterior=post, created="2026-01-01"))
    sec = dom.by_id("ct")
    assert sec is not None
    pools = rows_of(sec.find("table", class_=has("ct-pools")))
    by_pool = {r["pool"].text(): r for r in pools}
    # the amplified pools only, with exactly the Cts of the readouts file
    assert set(by_pool) == {"P1", "I0", "I3"}
    assert by_pool["P1"]["ct_readouts"].text() == "30.4, 30.9"
    # a lone positive in a pool of four reads log2 4 = 2 cycles later (common practice)
    lone = float(by_pool["P1"]["lone_positive_ct"].attrs["data-value"])
    assert lone == pytest.approx((30.4 + 30.9) / 2 - 2.0, abs=1e-9)
    assert float(by_pool["I0"]["lone_positive_ct"].attrs["data-value"]) == pytest.approx(28.6)
    # each specimen's estimate is the posterior's own column, to the CSV's precision
    frame = post.to_frame()
    specimens = rows_of(sec.find("table", class_=has("ct-specimens")))
    shown = {r["sample"].text(): r for r in specimens}
    want = frame.index[np.isfinite(frame["ct_mean"].to_numpy(float))]
    assert set(shown) == set(want) and "S10" in shown
    for s in want:
        for col in ("ct_mean", "ct_low", "ct_high"):
            assert shown[s][col].attrs["data-value"] == "%.10g" % frame.loc[s, col]
    # S10 read 28.6 alone and its pool of four 30.4 and 30.9: its Ct lies near 28.6
    assert frame.loc["S10", "ct_low"] < 28.6 < frame.loc["S10", "ct_high"]
    figure = sec.find("svg", aria_label=lambda v: v.startswith("Estimated individual Ct"))
    assert figure is not None and "S10" in figure.text()


def test_implied_sensitivity_table_against_monte_carlo_from_the_definition(assay):
    run = dorfman_run()
    dom = parse(build_report(run=run, assay=assay, created="2026-01-01"))
    rows = rows_of(dom.by_id("ct").find("table", class_=has("ct-se")))
    m = assay.ct
    rng = np.random.default_rng(1)
    n = 40000
    for r in rows:
        k = int(r["pool_size"].text())
        for d in (1, 2, 3, 4):
            key = f"se_{d}_positive" + ("s" if d > 1 else "")
            if d > k:
                assert r[key].text() == ""
                continue
            value = float(r[key].attrs["data-value"])
            comp = rng.random((n, d)) < m.weights[0]
            c = np.where(comp, rng.normal(m.means[0], m.sds[0], (n, d)),
                         rng.normal(m.means[1], m.sds[1], (n, d)))
            pool = m.cycles_per_doubling * (np.log2(k) - np.log2(np.exp2(-c).sum(axis=1)))
            y = pool + rng.normal(0, m.noise_sd, n)
            hit = (rng.random(n) < m.detection_max) & (y < m.cutoff)
            sd = np.sqrt(value * (1 - value) / n)
            assert abs(hit.mean() - value) < 4 * sd + 1e-3, (k, d, hit.mean(), value)
    assert {int(r["pool_size"].text()) for r in rows} == {1, 4}


def test_no_ct_section_for_a_binary_assay():
    run = dorfman_run()
    binary = Assay.from_dict({"specificity": 0.99, "sensitivity": {"model": "constant",
                                                                   "value": 0.95}})
    dom = parse(build_report(run=run, assay=binary, created="2026-01-01"))
    assert dom.by_id("ct") is None and dom.by_id("ct-calibration") is None


def simulated_validation(rng, n=240, s=1.0):
    k = rng.choice([1, 2, 4, 8, 16], n)
    ind = rng.normal(28, 3, n)
    y = ind + s * np.log2(k) + rng.normal(0, 0.4, n)
    hit = (rng.random(n) < 0.98) & (y < 40)
    rows = [(kk, 1, "positive" if h else "negative", f"{v:.3f}" if h else "", f"{c:.3f}")
            for kk, c, v, h in zip(k, ind, y, hit)]
    rows += [(8, 0, "negative", "", "")] * 196 + [(8, 0, "positive", "36.0", "")] * 4
    return pd.DataFrame(rows, columns=["pool_size", "positives", "result", "ct", "individual_ct"])


def test_ct_calibration_section_from_the_command_line(cli, tmp_path):
    path = tmp_path / "validation.csv"
    simulated_validation(np.random.default_rng(8)).to_csv(path, index=False)
    res = cli("calibrate", "--validation", path, "--out", tmp_path / "ct.toml", "--report",
              tmp_path / "fit.html")
    assert res.code == 0, res.err
    dom = parse((tmp_path / "fit.html").read_text(encoding="utf-8"))
    sec = dom.by_id("ct-calibration")
    assert sec is not None and sec.find("svg") is not None
    rows = rows_of(sec.find("table", class_=has("ct-fit")))
    assert [int(r["pool_size"].text()) for r in rows] == [1, 2, 4, 8, 16]
    for r in rows:
        # the observed rise over the individual Ct follows log2 k (common practice), within the
        # noise of about 48 readouts per size (sd 0.4 / sqrt(48) = 0.06; 0.25 is four of those
        # plus the rounding of the file)
        assert float(r["mean_shift"].attrs["data-value"]) == pytest.approx(
            float(r["log2_k"].attrs["data-value"]), abs=0.25)
    # the assay file records how it was fitted, and the assay section shows the Ct model
    from bayespool.assay import Assay as A
    assert A.read(tmp_path / "ct.toml").details["method"] == "validation"
    assert dom.by_id("ct") is not None and dom.by_id("assay") is not None
