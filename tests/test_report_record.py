"""The report as a record a laboratory can sign: every value written for people, once and with its
right label; why each specimen is where it is; an audit trail whose digests match the inputs.

References: ``hashlib.sha256`` (FIPS 180-4) and ``os.stat`` on the input files for the audit
trail; the layout and readouts files themselves for the why-view and the pool IDs; the samples
file for the plate and well columns of posterior.csv.
"""
import hashlib
import json
import os
import re

import numpy as np
import pandas as pd
import pytest

from bayespool.demo import run_demo

from .test_report_dom import parse

ALLOWED_BRACKETS = {"[ct]", "[results]", "[fit]", "[sensitivity]"}  # TOML table names in prose
PYTHON_LOOKS = [
    (re.compile(r"\[[^\]]*\]"), "a bracketed list"),
    (re.compile(r"[{}]"), "a brace"),
    (re.compile(r"\b(None|True|False|nan|NaN)\b"), "a Python constant"),
    (re.compile(r"\b[A-Z][A-Za-z]+\([^)]*\)"), "an object repr"),
    (re.compile(r"'\w+':"), "a dict repr"),
]


def visible_text(node) -> str:
    """The text a reader sees: everything but script, style and attribute values."""
    if node.tag in ("script", "style"):
        return ""
    out = []
    for c in node.children:
        out.append(visible_text(c) if hasattr(c, "tag") else c)
    return " ".join(out)


def cells_of(tr):
    return [c for c in tr.children if hasattr(c, "tag") and c.tag in ("th", "td")]


def python_leaks(text: str) -> list[str]:
    found = []
    for pattern, what in PYTHON_LOOKS:
        for m in pattern.finditer(text):
            if m.group(0) in ALLOWED_BRACKETS:
                continue
            found.append(f"{what}: ...{text[max(0, m.start() - 40):m.end() + 20]}...")
    return found


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("record")
    return run_demo(folder)


@pytest.fixture(scope="module")
def reports(demo, tmp_path_factory):
    """Reports of every kind from the command line: exact, Gibbs, BP, plan, both calibrations."""
    from bayespool.cli import main
    d = demo.folder
    out = tmp_path_factory.mktemp("reports")
    run = ["--layout", d / "layout.csv", "--readouts", d / "readouts.csv", "--samples",
           d / "samples.csv", "--assay", d / "assay.toml"]
    commands = {
        "exact": ["decode", *run, "--out", out / "e.csv", "--report", out / "exact.html"],
        "gibbs": ["decode", *run, "--method", "gibbs", "--seed", "3", "--gibbs-sweeps", "1500",
                  "--out", out / "g.csv", "--report", out / "gibbs.html"],
        "bp": ["decode", *run, "--method", "bp", "--out", out / "b.csv", "--report",
               out / "bp.html"],
        "plan": ["plan", *run, "--tests", "4", "--out", out / "n.csv", "--report",
                 out / "plan.html"],
        "validation": ["calibrate", "--validation", d / "invented_validation.csv", "--out",
                       out / "v.toml", "--report", out / "validation.html", "--no-plot"],
        "runs": ["calibrate", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
                 "--model", "constant", "--out", out / "r.toml", "--report", out / "runs.html",
                 "--no-plot", "--allow-unidentified"],
    }
    pages = {}
    for name, args in commands.items():
        assert main([str(a) for a in args]) == 0, name
        pages[name] = parse((out / f"{name}.html").read_text(encoding="utf-8"))
    pages["demo"] = parse(demo.files["report"].read_text(encoding="utf-8"))
    return pages


@pytest.mark.parametrize("name", ["demo", "exact", "gibbs", "bp", "plan", "validation", "runs"])
def test_no_python_structures_in_the_report_text(reports, name):
    leaks = python_leaks(visible_text(reports[name]))
    assert not leaks, "\n".join(leaks[:10])


def test_the_scan_catches_what_used_to_leak():
    # the strings the issue quoted, as the old report printed them
    for bad in ("comparison [ model constant ]", "warnings []",
                "moves [SingleSiteMove(), PoolSwapMove(rounds=1)]",
                "relative_information 0.5, material_limit None"):
        assert python_leaks(bad), bad
    assert not python_leaks("the assay has no [ct] table: read as positive/negative only")


def test_count_distribution_is_labelled_by_its_source(reports):
    def source(page):
        return page.by_id("positives").text()
    assert "Gibbs sampler" in source(reports["gibbs"]) and "exact" not in source(reports["gibbs"])
    assert "exact enumeration" in source(reports["exact"])


def test_the_fit_is_shown_once(reports):
    for name in ("validation", "runs"):
        page = reports[name]
        estimates = [h for h in page.find_all("h4") if h.text() == "Estimates"]
        assert len(estimates) == 1, name
        assert page.by_id("calibration").find("table", class_="data params") is not None
        assert page.by_id("assay").find("table", class_="data nested") is None


def test_calibration_from_runs_shows_the_fitted_prevalence(reports, tmp_path):
    summary = reports["runs"].by_id("summary").text()
    assert "fitted by the calibration" in summary
    from bayespool.assay import Assay
    toml = [p for p in tmp_path.parent.parent.rglob("r.toml")]
    fitted = Assay.read(toml[0]).details["estimates"]["prevalence"]["estimate"]
    assert f"Prevalence{fitted:.4g} fitted" in summary.replace(" ", "") or \
        f"{fitted:.4g} fitted" in summary
    assert "for every specimen" not in summary.split("Prevalence")[0]


def test_jargon_is_folded_into_the_technical_section(reports):
    for name in ("exact", "gibbs", "bp"):
        decoder = reports[name].by_id("decoder")
        technical = decoder.find("details", class_="technical")
        assert technical is not None and "sweeps" in technical.text()
        outside = decoder.text().replace(technical.text(), "")
        for word in ("sweeps", "residual", "components", "log evidence"):
            assert word not in outside.lower(), (name, word)


# ---- why each specimen is where it is
def test_why_view_lists_each_specimens_pools_readouts_and_other_members(demo, reports):
    page = reports["exact"]
    d = demo.folder
    layout = pd.read_csv(d / "layout.csv", dtype=str)
    readouts = pd.read_csv(d / "readouts.csv", dtype=str, keep_default_na=False)
    post = pd.read_csv(page_csv(demo, "e.csv"), dtype={"sample": str})
    prob = dict(zip(post["sample"], post["probability"]))
    ids = list(post["sample"])
    entries = page.by_id("why").find_all("details", class_="why")
    assert len(entries) == len(ids)  # every specimen of a run this size
    for i in (0, int(np.argmax(post["probability"])), len(ids) - 1):
        entry = page.by_id(f"why-{i}")
        sample = ids[i]
        assert entry.find("summary").find("span", class_="id").text() == sample
        rows = entry.find("tbody").find_all("tr")
        pools = set(layout.loc[layout["sample"] == sample, "pool"])
        assert {r.find("th").text() for r in rows} == pools
        for r in rows:
            pool = r.find("th").text()
            members = set(layout.loc[layout["pool"] == pool, "sample"]) - {sample}
            cells = r.find_all("td")
            words = readouts.loc[readouts["pool"] == pool, "result"].str.lower().tolist()
            n_pos = sum(w in ("positive", "pos", "1") for w in words)
            assert (f"{n_pos} positive" in cells[1].text()) == (n_pos > 0)
            links = cells[3].find_all("a")
            assert {a.text() for a in links} == members
            for a in links:  # each other member's probability, as in posterior.csv
                assert a.attrs["href"] == f"#why-{ids.index(a.text())}"
                from bayespool.report.formatting import prob_short
                assert f"{a.text()} {prob_short(prob[a.text()])}" in cells[3].text()


def page_csv(demo, name):
    # this session's temporary folder only: the folder above it holds other sessions' files
    return next(demo.folder.parent.rglob(name))


def test_calls_table_and_plate_map_link_to_the_why_view(demo, reports):
    page = reports["exact"]
    layout = pd.read_csv(demo.folder / "layout.csv", dtype=str)
    table = page.by_id("calls-table")
    col = [th.attrs["data-key"] for th in table.find("thead").find_all("th")].index("pool_ids")
    for tr in table.find("tbody").find_all("tr")[:20]:
        sample = tr.attrs["data-sample"]
        link = tr.find("th").find("a")
        assert link.text() == sample and page.by_id(link.attrs["href"][1:]) is not None
        shown = set(cells_of(tr)[col].text().split(", "))
        assert shown == set(layout.loc[layout["sample"] == sample, "pool"])
    for td in page.by_id("plate-map").find_all("td", data_sample=True)[:20]:
        href = td.find("a").attrs["href"]
        entry = page.by_id(href[1:])
        assert entry.find("summary").find("span", class_="id").text() == td.attrs["data-sample"]


def test_posterior_csv_carries_plate_and_well(demo):
    post = pd.read_csv(demo.files["posterior"], dtype=str)
    samples = pd.read_csv(demo.folder / "samples.csv", dtype=str)
    merged = post.merge(samples, on="sample", suffixes=("", "_file"))
    assert len(merged) == len(post)
    assert (merged["plate"] == merged["plate_file"]).all()
    assert (merged["well"] == merged["well_file"]).all()


# ---- the audit trail
def digest(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def test_json_audit_matches_hashlib_and_stat(cli, demo, tmp_path):
    d = demo.folder
    args = ["decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
            "--samples", d / "samples.csv", "--assay", d / "assay.toml", "--seed", "11",
            "--out", tmp_path / "p.csv", "--json"]
    res = cli(*args)
    assert res.code == 0, res.err
    audit = json.loads(res.out)["audit"]
    from bayespool import __version__
    assert audit["version"] == __version__ and audit["seed"] == 11
    assert audit["command"] == "bayespool " + " ".join(str(a) for a in args)
    assert re.match(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\+00:00$", audit["date"])
    files = {f["role"]: f for f in audit["inputs"]}
    assert set(files) == {"--layout", "--readouts", "--samples", "--assay"}
    for role, name in (("--layout", "layout.csv"), ("--readouts", "readouts.csv"),
                       ("--samples", "samples.csv"), ("--assay", "assay.toml")):
        assert files[role]["sha256"] == digest(d / name)
        assert files[role]["size"] == os.stat(d / name).st_size


def test_report_audit_table_matches_hashlib(demo, reports):
    rows = reports["exact"].by_id("audit").find("table", class_="data inputs").find(
        "tbody").find_all("tr")
    seen = {}
    for tr in rows:
        cells = [c.text() for c in cells_of(tr)]
        seen[cells[1]] = (cells[2], cells[3])
    for name in ("layout.csv", "readouts.csv", "samples.csv", "assay.toml"):
        path = demo.folder / name
        size, sha = seen[str(path)]
        assert sha == digest(path)
        assert int(size.replace("\u2009", "")) == os.stat(path).st_size


def test_workbook_input_is_hashed_whole_and_names_its_sheet(cli, tmp_path):
    from .test_files import ASSAY, workbook
    book = workbook(tmp_path / "run.xlsx", {"L": [("pool", "sample"), ("P1", "a"), ("P1", "b")],
                                            "R": [("pool", "result"), ("P1", "pos")]})
    (tmp_path / "a.toml").write_text(ASSAY)
    res = cli("decode", "--layout", f"{book}#L", "--readouts", f"{book}#R", "--assay",
              tmp_path / "a.toml", "--out", tmp_path / "p.csv", "--json")
    assert res.code == 0, res.err
    files = {f["role"]: f for f in json.loads(res.out)["audit"]["inputs"]}
    assert files["--layout"]["sha256"] == digest(book) and files["--readouts"]["sheet"] == "R"


def test_print_copy_has_review_fields_and_a_print_stylesheet(reports):
    page = reports["exact"]
    review = page.by_id("review")
    assert [s.text() for s in review.find_all("span", class_="label")] == \
        ["Reviewed by", "Date", "Signature"]
    style = page.find("style").text()
    assert "@media print" in style and "section.review" in style.split("@media print")[1]


def test_large_run_lists_only_the_specimens_not_called_negative():
    from bayespool.assay import Assay, ConstantSensitivity
    from bayespool.decoders import decode
    from bayespool.report import build_report
    from bayespool.report.why import ALL_UP_TO
    from bayespool.run import Run
    n = ALL_UP_TO + 200
    pools = np.arange(n) // 8
    readout = np.zeros(pools.max() + 1, dtype=int)
    readout[3] = 1  # one positive pool: its eight members are not negative
    run = Run.from_arrays(pools, np.arange(n), n, pools.max() + 1, 0.01,
                          np.arange(pools.max() + 1), readout)
    post = decode(run, Assay(0.99, ConstantSensitivity(0.95)))
    page = parse(build_report(run=run, posterior=post, created="2026-01-01"))
    entries = page.by_id("why").find_all("details", class_="why")
    not_negative = np.flatnonzero(post.calls() != "negative")
    assert sorted(int(e.attrs["id"][4:]) for e in entries) == sorted(not_negative.tolist())
    assert f"the {len(not_negative)} that are not called negative" in page.by_id("why").text()
