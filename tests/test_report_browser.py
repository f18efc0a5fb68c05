"""The report in a real browser: headless Chromium loads it from a file, runs its script under the
page's Content-Security-Policy, and draws it.

Checks from the DOM dump (after the script ran): the main sections rendered, the table script
worked (sort buttons, the status line, a view given in the address sorts and filters the rows), and
hostile IDs stayed text. Checks from a screenshot: the page is not blank and shows the caution banner
and the plate map's colours. Without Chromium the tests skip on a developer machine and fail in CI
(CI=true), where .ci/run installs it.
"""
import os
import shutil
import subprocess
from types import SimpleNamespace

import numpy as np
import pytest

from bayespool.demo import run_demo
from bayespool.report.palette import colour, rgb_at, position

from .test_report_dom import parse
from .test_report_escape import HOSTILE, hostile_report

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run",
         "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars"]
TIMEOUT = 120


def chromium_binary():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return None


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    path = chromium_binary()
    if path is None:
        message = "headless Chromium is not installed (Debian package 'chromium')"
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(message + "; .ci/run must install it")
        pytest.skip(message)
    root = tmp_path_factory.mktemp("chromium")
    counter = iter(range(1000))

    def run(url, *extra):
        profile = root / f"profile{next(counter)}"  # a fresh profile every time
        cmd = [path, *FLAGS, f"--user-data-dir={profile}", *extra, url]
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=TIMEOUT,
                              stdin=subprocess.DEVNULL)
        assert done.returncode == 0, done.stderr[-2000:]
        return done

    def dom(url):
        out = run(url, "--dump-dom", "--virtual-time-budget=3000").stdout
        assert "<html" in out, "empty DOM dump"
        return out

    def screenshot(url, png, size=(1280, 7000)):
        run(url, f"--screenshot={png}", f"--window-size={size[0]},{size[1]}")
        assert png.exists()
        import matplotlib.image
        return matplotlib.image.imread(str(png))

    return SimpleNamespace(dom=dom, screenshot=screenshot)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser-demo")
    result = run_demo(folder)
    return SimpleNamespace(result=result, url=result.files["report"].resolve().as_uri())


def test_main_sections_render_and_the_script_runs(browser, demo):
    dom = parse(browser.dom(demo.url))
    for sid in ("caution", "summary", "decoder", "assay", "calls", "plate-map", "ambiguity",
                "positives"):
        node = dom.by_id(sid)
        assert node is not None, sid
        assert node.text().strip(), sid
    assert "not a diagnostic device" in dom.by_id("caution").text()
    assert dom.find("html").attrs.get("data-script") == "ran"  # allowed by the CSP hash
    controls = dom.by_id("calls-controls")
    assert "hidden" not in controls.attrs
    assert dom.by_id("calls-status").text() == "showing 288 of 288 specimens"
    table = dom.by_id("calls-table")
    assert len(table.find("thead").find_all("button", class_="sort")) == \
        len(table.find("thead").find_all("th"))
    assert len(table.find("tbody").find_all("tr")) == 288
    plates = dom.by_id("plate-map").find_all("table", class_="plate p96")
    assert len(plates) == 3
    assert sum(len(p.find_all("td", data_sample=True)) for p in plates) == 288
    assert dom.by_id("assay").find("svg") is not None
    assert dom.by_id("positives").find("svg") is not None


def test_ct_sections_render_with_their_figures(browser, demo):
    # the demo reads an invented Ct assay: the Ct evidence and the Ct calibration render, each
    # specimen with an estimated Ct appears in the figure, and every Ct of the readouts file is
    # in the pools table
    dom = parse(browser.dom(demo.url))
    ct = dom.by_id("ct")
    assert ct is not None and len(ct.find_all("svg")) == 2
    frame = demo.result.posterior.to_frame()
    estimated = frame.index[np.isfinite(frame["ct_mean"].to_numpy(float))]
    figure_text = ct.find_all("svg")[0].text()
    assert len(estimated) and all(str(s) in figure_text for s in estimated)
    import pandas as pd
    readouts = pd.read_csv(demo.result.files["readouts"], dtype=str, keep_default_na=False)
    table = ct.find("table", class_=lambda v: "ct-pools" in v.split()).text()
    for value in readouts.loc[readouts["ct"] != "", "ct"]:
        assert value in table
    fit = dom.by_id("ct-calibration")
    assert fit is not None and fit.find("svg") is not None


def test_a_view_in_the_address_sorts_and_filters(browser, demo):
    post = demo.result.posterior
    dom = parse(browser.dom(demo.url + "#view:sort=probability:asc;call=inconclusive"))
    rows = dom.by_id("calls-table").find("tbody").find_all("tr")
    shown = [r for r in rows if "hidden" not in r.attrs]
    undecided = post.undecided()
    assert len(shown) == len(undecided)
    assert {r.attrs["data-sample"] for r in shown} == set(post.sample_ids[undecided])
    values = [float(r.find("td", class_="num prob").attrs["data-value"]) for r in shown]
    assert values == sorted(values)
    assert dom.by_id("calls-status").text() == f"showing {len(undecided)} of 288 specimens"
    head = dom.by_id("calls-table").find("th", data_key="probability")
    assert head.attrs.get("aria-sort") == "ascending"
    # exact search by ID, as a click on a well does
    target = post.sample_ids[int(np.argmax(post.probability))]
    dom = parse(browser.dom(demo.url + f"#view:q=={target}"))
    shown = [r for r in dom.by_id("calls-table").find("tbody").find_all("tr")
             if "hidden" not in r.attrs]
    assert [r.attrs["data-sample"] for r in shown] == [target]


def test_screenshot_is_not_blank_and_shows_banner_and_plate_colours(browser, demo, tmp_path):
    img = browser.screenshot(demo.url, tmp_path / "page.png")
    rgb = (img[..., :3] * 255).round()
    grey = rgb.mean(axis=2)
    assert grey.std() > 20, "page looks blank"
    assert (grey < 250).mean() > 0.05
    assert (grey < 80).mean() > 0.002  # dark text is drawn

    def pixels(hex_colour, tol=6):
        target = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)])
        return int((np.abs(rgb - target).max(axis=2) <= tol).sum())

    assert pixels("#fff4d6") > 20_000, "caution banner not drawn"
    # the wells of the plate map in their scale colours: the many negatives (about 0.005; a well
    # is about 44 x 32 pixels) and the few positives (about 0.998)
    post = demo.result.posterior
    neg = post.probability[post.call_codes() == 0]
    pos = post.probability[post.call_codes() == 2]
    assert pixels(colour(float(np.median(neg))), tol=8) > 100 * 1000
    assert pixels(colour(float(np.median(pos))), tol=8) > len(pos) * 400


def test_hostile_ids_stay_text_in_the_browser(browser, tmp_path):
    for wells in (True, False):
        path = tmp_path / f"hostile-{wells}.html"
        path.write_text(hostile_report(wells), encoding="utf-8")
        raw = browser.dom(path.resolve().as_uri())
        dom = parse(raw)
        assert dom.find("title").text() == HOSTILE[0]  # no script rewrote the title
        assert dom.find("html").attrs.get("data-script") == "ran"
        assert dom.find("img") is None and dom.by_id("injected") is None
        assert len(dom.find_all("script")) == 1
        for node in dom.iter():
            assert not [a for a in node.attrs if a.lower().startswith("on")]
        rows = dom.by_id("calls-table").find("tbody").find_all("tr")
        assert {r.find("th").text() for r in rows} >= set(HOSTILE)
        assert "&lt;script&gt;document.title" in raw


def test_the_colour_scale_helpers_agree():
    # the screenshot test looks for colour(p); it must be the colour the scale defines
    assert colour(0.3) == "#{:02x}{:02x}{:02x}".format(*(int(round(v)) for v in
                                                        rgb_at(position(0.3))))


def test_rendered_text_has_no_python_structures(browser, demo):
    # the DOM after the script ran, as a reader sees it (script and style left out)
    from .test_report_record import python_leaks, visible_text
    dom = parse(browser.dom(demo.url))
    leaks = python_leaks(visible_text(dom.find("body")))
    assert not leaks, "\n".join(leaks[:10])


def test_a_specimen_link_opens_its_why_entry(browser, demo):
    post = demo.result.posterior
    i = int(np.argmax(post.probability))
    dom = parse(browser.dom(demo.url + f"#why-{i}"))
    entry = dom.by_id(f"why-{i}")
    assert "open" in entry.attrs
    assert entry.find("summary").find("span", class_="id").text() == post.sample_ids[i]
    others = [d for d in dom.find_all("details", class_="why") if "open" in d.attrs]
    assert others == [entry]
