"""Hostile strings in every user-supplied place (specimen, pool and plate IDs, file names, title,
notes, diagnostics, plan, calibration) come out of the report escaped and inert.

The page is read back with an HTML tokenizer (html.parser, the same tokenisation rules as a
browser, WHATWG HTML): no element or attribute that a hostile string tried to inject may exist, and
each string must read back as the very same text. The browser test repeats this in Chromium.
"""
import dataclasses

import pandas as pd
import pytest

from bayespool.assay import Assay, ConstantSensitivity
from bayespool.decoders import decode
from bayespool.report import build_report
from bayespool.report.escape import text
from bayespool.report.script import JS
from bayespool.run import Run

from .test_report_dom import parse

HOSTILE = [
    "<script>document.title='pwned'</script>",
    '"><img src=x onerror="document.title=\'pwned\'">',
    "' onmouseover='alert(1)' x='",
    "</td></tr></table><h1 id=injected>X</h1>",
    "<svg onload=alert(1)>",
    "a&amp;b &lt;i&gt;",
    "<!-- comment",
    "]]><![CDATA[",
    "</style><style>body{display:none}</style>",
    "</script><script>alert(2)</script>",
]
ALLOWED_TAGS = {
    "#document", "html", "head", "meta", "title", "style", "body", "header", "h1", "h2", "h3", "p",
    "div", "span", "b", "nav", "a", "main", "section", "dl", "dt", "dd", "ul", "li", "code",
    "details", "summary", "table", "caption", "thead", "tbody", "tr", "th", "td", "figure",
    "figcaption", "label", "input", "select", "option", "button", "noscript", "footer", "script",
    # SVG of the figures, the legend and the ranked chart
    "svg", "defs", "g", "path", "clippath", "clipPath", "use", "text", "rect", "line",
    "lineargradient", "linearGradient", "stop", "title", "polyline",
}


def hostile_run(wells: bool):
    ids = HOSTILE + [f"ok{i}" for i in range(2)]
    pools = [f"pool {h}" for h in HOSTILE[:6]]
    lay = [{"pool": pools[i % 6], "sample": s} for i, s in enumerate(ids)]
    rd = [{"pool": p, "result": "positive" if j == 0 else "negative"} for j, p in enumerate(pools)]
    samples = pd.DataFrame({"sample": ids})
    if wells:
        samples["plate"] = HOSTILE[1]
        samples["well"] = [f"A{i + 1}" for i in range(len(ids))]
    run = Run.from_frames(pd.DataFrame(lay), pd.DataFrame(rd), samples, prevalence=0.05)
    return dataclasses.replace(run, sources={"layout": HOSTILE[0] + ".csv",
                                             "readouts": HOSTILE[1] + ".csv"},
                               notes=run.notes + (HOSTILE[3],))


class Fit:
    cells = pd.DataFrame({"pool_size": [4], "positives": [1], "readouts": [10], "detected": [9],
                          "label": [HOSTILE[2]]})

    def summary(self):
        return {"model": HOSTILE[0], HOSTILE[4]: HOSTILE[1]}


def hostile_report(wells: bool) -> str:
    run = hostile_run(wells)
    assay = Assay(0.99, ConstantSensitivity(0.95), details={"source": HOSTILE[8]})
    post = decode(run, assay)
    post.diagnostics["note"] = HOSTILE[9]
    post.diagnostics["ambiguity_groups"] = [{"samples": HOSTILE[:3], "probability": 0.9,
                                             "why": HOSTILE[5]}]
    post.warnings.append(HOSTILE[6])
    plan = pd.DataFrame({"pool": [HOSTILE[3], HOSTILE[3]], "sample": HOSTILE[:2],
                         "p_positive": [0.5, 0.5], "why": [HOSTILE[7], HOSTILE[4]]})
    return build_report(run=run, assay=assay, posterior=post, plan=plan, calibration=Fit(),
                        title=HOSTILE[0], created="2026-01-01", notes=[HOSTILE[2]],
                        file_name=HOSTILE[1] + ".html")


@pytest.fixture(scope="module", params=[True, False], ids=["plate-map", "ranked"])
def page(request):
    html = hostile_report(request.param)
    return html, parse(html)


def test_no_injected_element_or_attribute(page):
    html, dom = page
    tags = {n.tag for n in dom.iter()}
    assert tags <= ALLOWED_TAGS, tags - ALLOWED_TAGS
    assert dom.find("img") is None and dom.find(id="injected") is None
    for node in dom.iter():
        assert not [a for a in node.attrs if a.lower().startswith("on")], node.attrs
    scripts = dom.find_all("script")
    assert len(scripts) == 1 and scripts[0].text() == JS
    assert len(dom.find_all("style")) == 1
    assert dom.find_all("h1") == [dom.by_id("title")]


def test_raw_markup_of_hostile_strings_never_appears(page):
    html, _ = page
    for h in HOSTILE:
        if any(ch in h for ch in "<>\"'&"):
            assert h not in html, h
    assert "<img" not in html and "onerror=\"" not in html and "<h1 id=injected" not in html


def test_hostile_strings_read_back_as_the_same_text(page):
    _, dom = page
    assert dom.find("title").text() == HOSTILE[0]
    assert dom.by_id("title").text() == HOSTILE[0]
    table = dom.by_id("calls-table")
    rows = {tr.attrs["data-sample"]: tr for tr in table.find("tbody").find_all("tr")}
    for h in HOSTILE:
        assert h in rows
        assert rows[h].find("th").text() == h
    summary = dom.by_id("summary").text()
    for h in (HOSTILE[0] + ".csv", HOSTILE[1] + ".csv", HOSTILE[2], HOSTILE[3]):
        assert h in summary
    assert HOSTILE[1] + ".html" in dom.find("header").text()
    assert HOSTILE[9] in dom.by_id("decoder").text() and HOSTILE[6] in dom.by_id("decoder").text()
    assert HOSTILE[8] in dom.by_id("assay").text()
    groups = dom.by_id("ambiguity").text()
    assert all(h in groups for h in HOSTILE[:3]) and HOSTILE[5] in groups
    plan = dom.by_id("plan").text()
    assert HOSTILE[3] in plan and HOSTILE[7] in plan and HOSTILE[4] in plan
    cal = dom.by_id("calibration").text()
    assert HOSTILE[0] in cal and HOSTILE[1] in cal and HOSTILE[2] in cal and HOSTILE[4] in cal


def test_map_labels_are_escaped(page):
    _, dom = page
    pm = dom.by_id("plate-map")
    if pm is not None:
        assert pm.find("table", class_="plate p96").attrs["data-plate"] == HOSTILE[1]
        for h in HOSTILE:
            well = pm.find("td", data_sample=h)
            assert well is not None and well.attrs["title"].startswith(h)
    else:
        ranked = dom.by_id("ranked")
        labels = [g.attrs["data-sample"] for g in ranked.find_all("g", data_sample=True)]
        assert set(HOSTILE) <= set(labels)
        for g in ranked.find_all("g", data_sample=True):
            assert g.find("title").text().startswith(g.attrs["data-sample"])


def test_escape_rules():
    assert text("<a href='x'>\"&") == "&lt;a href=&#x27;x&#x27;&gt;&quot;&amp;"
    assert text(None) == ""
    assert text(3.5) == "3.5"
    assert text("a\x00b\x1bc") == "a\ufffdb\ufffdc"
    # a right-to-left override could make one ID display as another: it is shown as a code
    assert text("ab\u202ecd") == "ab[U+202E]cd"
    assert text("tab\tand\nnewline") == "tab\tand\nnewline"
