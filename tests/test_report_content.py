"""The report's content: the demo report holds the numbers of the posterior CSV, each section
renders from what it is given, plates of 96 and 384 wells, and the page is self-contained."""
import base64
import dataclasses
import hashlib
import re
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity, TableSensitivity
from bayespool.decoders import decode
from bayespool.demo import run_demo
from bayespool.report import build_report, write_report
from bayespool.report.calibration import clopper_pearson
from bayespool.report.plate import parse_well, plate_format
from bayespool.run import Run

from .conftest import write_csv
from .test_report_dom import parse

CREATED = "2026-01-01 00:00 UTC"
ASSAY = Assay(0.99, DilutionSensitivity(0.98, 30.0, 1.3))


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    result = run_demo(folder)
    html = result.files["report"].read_text(encoding="utf-8")
    csv = pd.read_csv(result.files["posterior"], dtype=str, keep_default_na=False)
    return SimpleNamespace(result=result, html=html, dom=parse(html), csv=csv)


def small_run(wells=None, plates=None, n=12, pool=4, positives=(1,), seed=0):
    """n specimens in pools of ``pool`` then, for positive pools, individual tests."""
    ids = [f"S{i:02d}" for i in range(n)]
    lay, rd = [], []
    for b in range(n // pool):
        members = ids[b * pool:(b + 1) * pool]
        lay += [{"pool": f"P{b}", "sample": s} for s in members]
        pos = any(ids.index(s) in positives for s in members)
        rd.append({"pool": f"P{b}", "result": "positive" if pos else "negative"})
    samples = None
    if wells is not None:
        samples = pd.DataFrame({"sample": ids, "well": wells})
        if plates is not None:
            samples["plate"] = plates
    return Run.from_frames(pd.DataFrame(lay), pd.DataFrame(rd), samples, prevalence=0.05)


def report_dom(**kw):
    kw.setdefault("created", CREATED)
    html = build_report(**kw)
    return html, parse(html)


# ---- the demo report against the posterior CSV
def test_demo_lists_the_report(demo):
    assert demo.result.files["report"].name == "report.html"
    assert demo.result.files["report"].exists()


def test_demo_calls_table_holds_the_csv_numbers(demo):
    table = demo.dom.by_id("calls-table")
    keys = [th.attrs["data-key"] for th in table.find("thead").find_all("th")]
    rows = table.find("tbody").find_all("tr")
    assert len(rows) == len(demo.csv) == 288
    seen = {}
    for tr in rows:
        cells = dict(zip(keys, tr.children))
        seen[tr.attrs["data-sample"]] = cells
        assert cells["sample"].text() == tr.attrs["data-sample"]
    for _, row in demo.csv.iterrows():
        cells = seen[row["sample"]]
        # exact strings: the report keeps %.10g, the precision the CSV is written with
        assert cells["probability"].attrs["data-value"] == row["probability"]
        assert cells["prior"].attrs["data-value"] == row["prior"]
        assert cells["pools"].attrs["data-value"] == row["pools"]
        assert cells["positive_pools"].attrs["data-value"] == row["positive_pools"]
        assert cells["call"].text() == row["call"]
        assert cells["method"].text() == row["method"]
        shown = cells["probability"].text()
        p = float(row["probability"])
        if 1e-3 <= p <= 1 - 1e-4:
            assert float(shown) == pytest.approx(p, abs=5e-5)


def test_demo_summary_numbers_match_the_csv(demo):
    p = demo.csv["probability"].astype(float)
    expected = demo.dom.by_id("expected-positives")
    assert float(expected.attrs["data-value"]) == pytest.approx(p.sum(), rel=1e-9)
    counts = demo.csv["call"].value_counts()
    tiles = demo.dom.by_id("call-counts")
    for kind in ("positive", "inconclusive", "negative"):
        tile = tiles.find(class_=f"tile tile-{kind}")
        assert int(tile.find(class_="n").text()) == int(counts.get(kind, 0))


def test_demo_plate_map_wells_hold_the_csv_numbers(demo):
    plates = demo.dom.by_id("plate-map").find_all("table", class_="plate p96")
    assert len(plates) == 3
    samples = pd.read_csv(demo.result.files["samples"], dtype=str)
    by_id = demo.csv.set_index("sample")
    where = samples.set_index("sample")
    for plate in plates:
        wells = plate.find_all("td", data_sample=True)
        assert len(wells) == 96
        rows = plate.find("tbody").find_all("tr")
        for r, tr in enumerate(rows):
            for c, td in enumerate(tr.find_all("td")):
                sid = td.attrs["data-sample"]
                assert where.loc[sid, "plate"] == plate.attrs["data-plate"]
                assert where.loc[sid, "well"] == f"{'ABCDEFGH'[r]}{c + 1}"
                assert td.attrs["data-value"] == by_id.loc[sid, "probability"]
                assert f"call-{by_id.loc[sid, 'call']}" in td.classes()


def test_demo_count_distribution_table_matches_the_posterior(demo):
    post = demo.result.posterior
    table = demo.dom.by_id("positives").find("details").find("table")
    for tr in table.find("tbody").find_all("tr"):
        c, prob = tr.find_all("td")
        assert float(prob.attrs["data-value"]) == pytest.approx(
            post.count_distribution[int(c.attrs["data-value"])], rel=1e-9)
    lo, hi = post.positives_summary()["interval_95"]
    assert f"{lo} to {hi}" in demo.dom.by_id("positives").text()


def test_demo_report_says_the_data_is_invented(demo):
    assert "invented" in demo.dom.find("title").text()
    assert "invented for the demonstration" in demo.dom.by_id("summary").text()


# ---- self-contained, no network
def test_page_is_self_contained_and_its_policy_allows_only_its_script(demo):
    html, dom = demo.html, demo.dom
    scripts = dom.find_all("script")
    assert len(scripts) == 1
    js = scripts[0].text()
    digest = base64.b64encode(hashlib.sha256(js.encode()).digest()).decode()
    csp = dom.find("meta", http_equiv="Content-Security-Policy").attrs["content"]
    assert "default-src 'none'" in csp and f"script-src 'sha256-{digest}'" in csp
    for node in dom.iter():
        assert "src" not in node.attrs
        for key in ("href", "xlink:href"):
            if key in node.attrs:
                assert node.attrs[key].startswith("#"), node.attrs[key]
    assert node_tags(dom).isdisjoint({"link", "img", "iframe", "object", "embed", "base", "form"})
    assert "@import" not in html
    assert not re.search(r"url\((?!#)", html)
    assert "fetch(" not in js and "XMLHttpRequest" not in js and "innerHTML" not in js


def node_tags(dom):
    return {n.tag for n in dom.iter()}


def test_same_inputs_give_the_same_page():
    run = small_run()
    post = decode(run, ASSAY)
    a = build_report(run=run, assay=ASSAY, posterior=post, created=CREATED)
    b = build_report(run=run, assay=ASSAY, posterior=post, created=CREATED)
    assert a == b


def test_every_svg_id_is_unique(demo):
    ids = [n.attrs["id"] for n in demo.dom.iter() if "id" in n.attrs]
    assert len(ids) == len(set(ids))


# ---- sections from what is given
def test_caution_is_always_there_and_sections_follow_the_inputs():
    _, dom = report_dom(assay=ASSAY)
    assert "not a diagnostic device" in dom.by_id("caution").text()
    assert "validated procedure" in dom.by_id("caution").text()
    assert dom.by_id("assay") is not None
    for sid in ("summary", "calls", "plate-map", "ranked", "plan", "calibration"):
        assert dom.by_id(sid) is None
    with pytest.raises(ValueError):
        build_report()


def test_no_wells_gives_a_ranked_chart_with_printed_probabilities():
    run = small_run()
    post = decode(run, ASSAY)
    _, dom = report_dom(run=run, assay=ASSAY, posterior=post)
    assert dom.by_id("plate-map") is None
    ranked = dom.by_id("ranked")
    bars = ranked.find_all("g", class_=lambda c: c.startswith("bar"))
    top = np.argsort(-post.probability, kind="stable")[:len(bars)]
    assert [b.attrs["data-sample"] for b in bars] == list(post.sample_ids[top])
    assert "0.0" in bars[-1].text() or "e-" in bars[-1].text()  # the value is printed
    assert ranked.find(class_="legend") is not None


def test_plate_of_384_wells():
    rows = "ABCDEFGHIJKLMNOP"
    wells = [f"{rows[i % 16]}{13 + i // 16}" for i in range(24)]  # columns 13..14 need 384
    run = small_run(wells=wells, plates=["big"] * 24, n=24)
    post = decode(run, ASSAY)
    _, dom = report_dom(run=run, posterior=post)
    plate = dom.by_id("plate-map").find("table", class_="plate p384")
    body_rows = plate.find("tbody").find_all("tr")
    assert len(body_rows) == 16
    assert all(len(tr.find_all("td")) == 24 for tr in body_rows)
    assert len(plate.find_all("td", data_sample=True)) == 24
    assert len(plate.find_all("td", class_="well empty")) == 384 - 24
    first = plate.find("td", data_sample="S00")
    assert first.attrs["data-value"] == f"{post.probability[0]:.10g}"


def test_plate_map_lists_specimens_it_cannot_place():
    # reading a samples file refuses such wells (tests/test_files.py); a run built in code can
    # still carry them, and the map lists what it cannot place
    wells = ["A1", "A2", "A2", "Z9", "", "B01", "C3", "C4", "C5", "C6", "C7", "C8"]
    run = small_run()
    run = dataclasses.replace(run, samples=pd.DataFrame({"sample": run.sample_ids, "well": wells}))
    post = decode(run, ASSAY)
    _, dom = report_dom(run=run, posterior=post)
    pm = dom.by_id("plate-map")
    assert pm.find("td", data_sample="S05") is not None  # B01 is B1
    unplaced = pm.find(class_="unplaced").text()
    assert "S02" in unplaced and "already taken" in unplaced
    assert "S03" in unplaced and "S04" in unplaced


@pytest.mark.parametrize("well, pos", [("A1", (0, 0)), ("h12", (7, 11)), ("B07", (1, 6)),
                                       ("P24", (15, 23)), (" C 3 ", (2, 2)), ("A0", None),
                                       ("AA1", None), ("1A", None), ("", None)])
def test_parse_well(well, pos):
    assert parse_well(well) == pos


def test_plate_formats_are_the_standard_96_and_384():
    # microplate formats: 96 wells = 8 rows x 12 columns, 384 = 16 x 24 (common practice)
    assert plate_format([7], [11]) == 96
    assert plate_format([8], [0]) == 384
    assert plate_format([0], [12]) == 384
    assert plate_format([15], [23]) == 384
    assert plate_format([16], [0]) is None


def test_assay_families_draw_their_curve_and_table():
    run = small_run()
    for assay in (Assay(0.99, ConstantSensitivity(0.9)), ASSAY,
                  Assay(0.995, TableSensitivity(((1, 1, 0.97), (4, 1, 0.9), (4, 2, 0.95))))):
        post = decode(run, assay)
        _, dom = report_dom(run=run, assay=assay, posterior=post)
        sec = dom.by_id("assay")
        svg = sec.find("svg", role="img")
        assert svg is not None and "dilution factor" in svg.text()
        assert assay.describe() in sec.text()
        if assay.sensitivity.model == "table":
            assert "Sensitivity table" in sec.text()
        lone = sec.find_all("table")[-1]
        values = [td.attrs["data-value"] for td in lone.find_all("td")]
        assert f"{float(assay.se(np.array([4]), np.array([1]))[0]):.10g}" in values


def test_decoder_diagnostics_convergence_and_groups():
    run = small_run()
    post = decode(run, ASSAY)
    post.diagnostics.update({"converged": False, "rhat_max": 1.31, "ess_min": 57.2,
                             "chains": [1, 2, 3, 4],
                             "ambiguity_groups": [{"samples": ["S00", "S01"], "probability": 0.93,
                                                   "positives": 1},
                                                  {"samples": [2, 3], "probability": 0.5}]})
    _, dom = report_dom(run=run, posterior=post)
    dec = dom.by_id("decoder")
    assert "not" in dom.by_id("convergence").text()
    assert "rhat max" in dec.text() and "1.31" in dec.text() and "57.2" in dec.text()
    groups = dom.by_id("ambiguity").find("table")
    rows = groups.find("tbody").find_all("tr")
    assert len(rows) == 2
    assert "S00" in rows[0].text() and "S01" in rows[0].text()
    assert rows[0].find_all("td")[2].attrs["data-value"] == "0.93"
    assert "S02" in rows[1].text() and "S03" in rows[1].text()  # indices mapped to IDs
    assert "ambiguity groups" not in dec.text()


def test_without_groups_the_unresolved_positive_pools_are_listed():
    # two pools of 4 share nothing; one reads positive: its 4 members stay inconclusive
    run = small_run(positives=(5,))
    post = decode(run, Assay(0.999, ConstantSensitivity(0.99)))
    assert len(post.undecided()) == 4
    _, dom = report_dom(run=run, posterior=post)
    table = dom.by_id("ambiguity").find("table")
    row = table.find("tbody").find("tr")
    assert row.find("th").text() == "P1"
    expected = float(post.probability[4:8].sum())
    assert float(row.find_all("td")[-1].attrs["data-value"]) == pytest.approx(expected)


def test_count_distribution_from_draws_when_not_exact():
    run = small_run()
    post = decode(run, ASSAY)
    rng = np.random.default_rng(1)
    post.count_distribution = None
    post.draws = (rng.random((400, run.n_samples)) < post.probability).astype(np.uint8)
    _, dom = report_dom(posterior=post)
    sec = dom.by_id("positives")
    assert "from 400 posterior draws" in sec.text()
    counts = np.bincount(post.draws.sum(axis=1), minlength=run.n_samples + 1) / 400
    for tr in sec.find("details").find("tbody").find_all("tr"):
        c, p = tr.find_all("td")
        assert float(p.attrs["data-value"]) == pytest.approx(counts[int(c.attrs["data-value"])])


def test_plan_section_groups_pools_and_shows_pool_columns():
    run = small_run()
    post = decode(run, ASSAY)
    plan = pd.DataFrame({"pool": ["N1", "N1", "N2"], "sample": ["S00", "S01", "S02"],
                         "p_positive": [0.41, 0.41, 0.2], "information_bits": [0.97, 0.97, 0.72],
                         "role": ["split", "split", "retest"], "note": ["a", "b", "c"]})
    _, dom = report_dom(run=run, posterior=post, plan=plan)
    sec = dom.by_id("plan")
    head = [th.text() for th in sec.find("thead").find_all("th")]
    assert head == ["#", "pool", "size", "p positive", "information bits", "role", "members"]
    rows = sec.find("tbody").find_all("tr")
    assert [r.find("th").text() for r in rows] == ["N1", "N2"]
    assert "0.970 bits" in rows[0].text() and "S00" in rows[0].text() and "note a" in rows[0].text()
    assert "1.690 bits" in dom.by_id("plan-totals").text()
    _, dom = report_dom(posterior=post, plan=plan.iloc[:0])
    assert "every specimen is decided" in dom.by_id("plan").text()


class FakeFit:
    """A calibration result as the calibrate command hands it over (summary() and cells)."""

    def __init__(self, cells, summary):
        self.cells, self._summary = cells, summary

    def summary(self):
        return self._summary


def test_calibration_cells_get_clopper_pearson_intervals_and_points():
    cells = pd.DataFrame({"pool_size": [1, 4, 8, 8], "positives": [1, 1, 1, 2],
                          "readouts": [20, 30, 25, 10], "detected": [20, 27, 19, 9],
                          "fitted": [0.98, 0.9, 0.8, 0.9]})
    fit = FakeFit(cells, {"model": "dilution", "aic": 41.2, "parameters": {"r50": 31.0}})
    _, dom = report_dom(assay=ASSAY, calibration=fit)
    sec = dom.by_id("calibration")
    assert "41.2" in sec.text() and "r50" in sec.text()
    table = sec.find("table", class_="data cells")
    keys = [th.attrs["data-key"] for th in table.find("thead").find_all("th")]
    assert keys[-3:] == ["observed_rate", "observed_95_low", "observed_95_high"]
    from statsmodels.stats.proportion import proportion_confint  # reference (references.md)
    for tr, (_, row) in zip(table.find("tbody").find_all("tr"), cells.iterrows()):
        tds = tr.find_all("td")
        assert float(tds[-3].attrs["data-value"]) == pytest.approx(row["detected"] / row["readouts"])
        lo, hi = proportion_confint(row["detected"], row["readouts"], alpha=0.05, method="beta")
        assert float(tds[-2].attrs["data-value"]) == pytest.approx(lo, abs=1e-9)
        assert float(tds[-1].attrs["data-value"]) == pytest.approx(hi, abs=1e-9)
    assert "calibration: observed" in dom.by_id("assay").find("svg").text()


@pytest.mark.parametrize("x, n", [(0, 10), (10, 10), (3, 17), (1, 1), (45, 50)])
def test_clopper_pearson_against_statsmodels(x, n):
    # Clopper & Pearson (1934); statsmodels proportion_confint(method="beta") as the reference
    from statsmodels.stats.proportion import proportion_confint
    lo, hi = clopper_pearson([x], [n])
    ref = proportion_confint(x, n, alpha=0.05, method="beta")
    assert lo[0] == pytest.approx(ref[0], abs=1e-10)
    assert hi[0] == pytest.approx(ref[1], abs=1e-10)


def test_mismatched_run_and_posterior_are_refused():
    post = decode(small_run(n=8), ASSAY)
    with pytest.raises(ValueError, match="8 specimens"):
        build_report(run=small_run(n=12), posterior=post)


# ---- the command line
def make_files(tmp_path, wells=True):
    lay = [(f"P{b}", f"S{b * 4 + j}") for b in range(3) for j in range(4)]
    write_csv(tmp_path / "layout.csv", lay, ["pool", "sample"])
    write_csv(tmp_path / "readouts.csv", [("P0", "positive"), ("P1", "negative"),
                                          ("P2", "negative")], ["pool", "result"])
    if wells:
        write_csv(tmp_path / "samples.csv", [(f"S{i}", f"A{i + 1}") for i in range(12)],
                  ["sample", "well"])
    return tmp_path


def test_decode_writes_the_report(cli, tmp_path):
    d = make_files(tmp_path)
    r = cli("decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--samples", d / "samples.csv", "--out", d / "post.csv", "--report", d / "rep.html")
    assert r.code == 0, r.err
    dom = parse((d / "rep.html").read_text(encoding="utf-8"))
    assert len(dom.by_id("calls-table").find("tbody").find_all("tr")) == 12
    assert dom.by_id("plate-map").find("table", class_="plate p96") is not None
    post = pd.read_csv(d / "post.csv", dtype=str)
    row = dom.by_id("calls-table").find("tr", data_sample="S0")
    assert row.find("td", class_="num prob").attrs["data-value"] == post.loc[0, "probability"]


def test_failed_decode_leaves_no_report_and_keeps_an_old_one(cli, tmp_path):
    d = make_files(tmp_path)
    (d / "rep.html").write_text("old", encoding="utf-8")
    write_csv(d / "readouts.csv", [("P9", "positive")], ["pool", "result"])
    r = cli("decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--out", d / "post.csv", "--report", d / "rep.html")
    assert r.code == 2 and "P9" in r.err and "Traceback" not in r.err
    assert (d / "rep.html").read_text(encoding="utf-8") == "old"
    r = cli("decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--out", d / "post.csv", "--report", d / "missing" / "rep.html")
    assert r.code == 2 and "does not exist" in r.err


def test_write_report_is_atomic_and_returns_the_path(tmp_path):
    run = small_run()
    target = write_report(tmp_path / "r.html", run=run, posterior=decode(run, ASSAY))
    assert target == tmp_path / "r.html"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]
    assert "r.html" in target.read_text(encoding="utf-8")  # names itself in the header


def test_calibration_section_names_what_a_past_run_fit_used(demo):
    # A fit from past runs (latent truth) must not be described as a validation.
    from bayespool.calibration import calibrate_runs
    folder = demo.result.folder
    run = Run.read(folder / "layout.csv", folder / "readouts.csv")
    fit = calibrate_runs(run, "constant")
    page = build_report(run=run, assay=fit.assay, calibration=fit)
    assert "past runs (pools and individual follow-up tests)" in page
    assert "validation data" not in page
