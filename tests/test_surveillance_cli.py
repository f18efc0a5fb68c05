"""`bayespool prevalence` through the command line: JSON keys of interface.md, files written,
bad input (exit 2, one line naming file, line and column), outputs that would overwrite an input."""
import json

import pytest

from .conftest import write_csv

ROWS = [("A1", 50, "positive", "north", "2024-W01"), ("A2", 50, "negative", "north", "2024-W01"),
        ("A3", 40, "negative", "north", "2024-W02"), ("A4", 25, "positive", "north", "2024-W02"),
        ("B1", 50, "negative", "south", "2024-W01"), ("B2", 50, "negative", "south", "2024-W01"),
        ("B3", 30, "positive", "south", "2024-W02"), ("B3", 30, "positive", "south", "2024-W02")]
HEADER = ["pool", "size", "result", "site", "week"]
KEYS = {"group", "pools", "positive_pools", "specimens", "mle", "bias_corrected", "lower",
        "upper", "interval", "level", "per"}


@pytest.fixture
def pools(tmp_path):
    return write_csv(tmp_path / "pools.csv", ROWS, HEADER)


def assert_bad(res, *needles):
    assert res.code == 2, (res.code, res.out, res.err)
    lines = res.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in res.err, res.err
    for n in needles:
        assert str(n) in lines[0], (n, lines[0])


def test_json_keys_and_values(cli, pools):
    res = cli("prevalence", "--pools", pools, "--by", "site", "--per", "1000", "--json")
    assert res.code == 0, res.err
    out = json.loads(res.out)
    assert [g["group"] for g in out["groups"]] == [{"site": "north"}, {"site": "south"}]
    for g in out["groups"]:
        assert KEYS <= set(g)
        assert g["interval"] == "skew-score" and g["level"] == 0.95 and g["per"] == 1000
        assert g["lower"] <= g["mle"] <= g["upper"]
    south = out["groups"][1]
    assert (south["pools"], south["positive_pools"], south["specimens"]) == (3, 1, 130)
    assert out["difference"]["a"] == "north"   # one column with two values: compared
    assert "perfect" in out["assay"]


def test_out_report_and_no_grouping(cli, pools, tmp_path):
    out, rep = tmp_path / "est.csv", tmp_path / "prev.html"
    res = cli("prevalence", "--pools", pools, "--by", "site,week", "--interval", "likelihood",
              "--out", out, "--report", rep)
    assert res.code == 0, res.err
    assert out.read_text().startswith("site,week,pools,positive_pools,specimens,mle,")
    html = rep.read_text()
    assert 'id="prevalence"' in html and "<svg" in html and "2024-W02" in html
    assert "not a diagnostic device" in html
    res = cli("prevalence", "--pools", pools, "--json")
    assert json.loads(res.out)["groups"][0]["group"] == {}


def test_run_files_give_the_same_as_a_pools_file(cli, tmp_path):
    lay = write_csv(tmp_path / "layout.csv", [("P1", "a"), ("P1", "b"), ("P2", "c"), ("P2", "d"),
                                               ("P3", "e")], ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv", [("P1", "positive"), ("P2", "negative"),
                                                ("P3", "negative")], ["pool", "result"])
    sm = write_csv(tmp_path / "samples.csv", [("a", "x"), ("b", "x"), ("c", "y"), ("d", "y"),
                                               ("e", "y")], ["sample", "site"])
    pf = write_csv(tmp_path / "pools.csv", [("P1", 2, "positive", "x"), ("P2", 2, "negative", "y"),
                                             ("P3", 1, "negative", "y")],
                   ["pool", "size", "result", "site"])
    a = cli("prevalence", "--layout", lay, "--readouts", rd, "--samples", sm, "--by", "site",
            "--json")
    b = cli("prevalence", "--pools", pf, "--by", "site", "--json")
    assert a.code == 0 and b.code == 0, (a.err, b.err)
    assert json.loads(a.out)["groups"] == json.loads(b.out)["groups"]
    write_csv(sm, [("a", "x"), ("b", "y"), ("c", "y"), ("d", "y"), ("e", "y")], ["sample", "site"])
    assert_bad(cli("prevalence", "--layout", lay, "--readouts", rd, "--samples", sm, "--by",
                   "site"), "samples.csv", "line 3", "column 2", "mixes")


@pytest.mark.parametrize("size,needle", [("0", "'0' is not a positive whole number"),
                                         ("2.5", "'2.5' is not a positive whole number"),
                                         ("ten", "'ten' is not a positive whole number"),
                                         ("", "has no size")])
def test_bad_size(cli, tmp_path, size, needle):
    rows = [("A1", 10, "positive", "n", "w"), ("A2", size, "negative", "n", "w")]
    f = write_csv(tmp_path / "pools.csv", rows, HEADER)
    assert_bad(cli("prevalence", "--pools", f), "pools.csv", "line 3", "column 2", needle)


def test_unknown_group_column(cli, pools):
    assert_bad(cli("prevalence", "--pools", pools, "--by", "region"), "pools.csv", "line 1",
               "region")


def test_replicates_with_two_sizes(cli, tmp_path):
    rows = [("A1", 10, "positive", "n", "w"), ("A1", 12, "positive", "n", "w")]
    f = write_csv(tmp_path / "pools.csv", rows, HEADER)
    assert_bad(cli("prevalence", "--pools", f), "pools.csv", "line 3", "column 2")


def test_bad_result_word(cli, tmp_path):
    f = write_csv(tmp_path / "pools.csv", [("A1", 10, "maybe", "n", "w")], HEADER)
    assert_bad(cli("prevalence", "--pools", f), "pools.csv", "line 2", "column 3")


@pytest.mark.parametrize("args,needle", [
    (["--level", "1.2"], "--level"), (["--per", "-5"], "--per"),
    (["--interval", "exact"], "--interval 'exact' needs pools of one size"),
    (["--compare", "north,east"], "--compare"), (["--prior", "0,1", "--interval", "bayes"],
                                                 "--prior")])
def test_bad_options_name_the_flag(cli, pools, args, needle):
    assert_bad(cli("prevalence", "--pools", pools, "--by", "site", *args), needle)


def test_perfect_assay_contradicted_by_replicates(cli, tmp_path):
    rows = [("A1", 10, "positive", "n", "w"), ("A1", 10, "negative", "n", "w")]
    f = write_csv(tmp_path / "pools.csv", rows, HEADER)
    assert_bad(cli("prevalence", "--pools", f), "cannot be explained")


def test_outputs_never_overwrite_inputs(cli, pools):
    before = pools.read_bytes()
    assert_bad(cli("prevalence", "--pools", pools, "--out", pools), "--out would overwrite")
    assert pools.read_bytes() == before


def test_failed_run_leaves_existing_output(cli, pools, tmp_path):
    out = tmp_path / "est.csv"
    out.write_text("keep me\n")
    assert_bad(cli("prevalence", "--pools", pools, "--by", "nothing", "--out", out), "nothing")
    assert out.read_text() == "keep me\n"


def test_assay_enters(cli, pools, tmp_path):
    assay = tmp_path / "assay.toml"
    assay.write_text('specificity = 0.995\n[sensitivity]\nmodel = "dilution"\nse_max = 0.98\n'
                     'r50 = 40.0\nslope = 1.5\n')
    perfect = json.loads(cli("prevalence", "--pools", pools, "--json").out)["groups"][0]
    res = cli("prevalence", "--pools", pools, "--assay", assay, "--json")
    imperfect = json.loads(res.out)["groups"][0]
    assert imperfect["mle"] > perfect["mle"]   # dilution hides positives, so more are inferred
    assert "dilution" in json.loads(res.out)["assay"]


# ---- regress
def regress_files(tmp_path):
    lay = write_csv(tmp_path / "layout.csv",
                    [(f"P{t}", f"S{t}{j}") for t in range(6) for j in range(2)]
                    + [("R00", "S00"), ("R01", "S01"), ("R50", "S50"), ("R51", "S51")],
                    ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv",
                   [("P0", "positive")] + [(f"P{t}", "negative") for t in range(1, 5)]
                   + [("P5", "positive"), ("R00", "positive"), ("R01", "negative"),
                      ("R50", "negative"), ("R51", "positive")], ["pool", "result"])
    sm = write_csv(tmp_path / "samples.csv",
                   [(f"S{t}{j}", 30 + 7 * t + j, "ab"[(t + j) % 2]) for t in range(6)
                    for j in range(2)], ["sample", "age", "site"])
    return lay, rd, sm


def test_regress_json_priors_and_out(cli, tmp_path):
    lay, rd, sm = regress_files(tmp_path)
    out, pri = tmp_path / "coef.csv", tmp_path / "priors.csv"
    res = cli("regress", "--layout", lay, "--readouts", rd, "--samples", sm, "--formula",
              "age + C(site)", "--json", "--out", out, "--priors", pri)
    assert res.code == 0, res.err
    js = json.loads(res.out)
    assert [c["term"] for c in js["coefficients"]] == ["Intercept", "age", "C(site)[T.b]"]
    assert set(js["coefficients"][0]) == {"term", "estimate", "std_error", "lower", "upper"}
    assert out.read_text().startswith("term,estimate,std_error,lower,upper\nIntercept,")
    priors = pri.read_text().splitlines()
    assert priors[0] == "sample,age,site,prior" and len(priors) == 13
    # the priors file is ready for decode
    dec = cli("decode", "--layout", lay, "--readouts", rd, "--samples", pri, "--out",
              tmp_path / "post.csv")
    assert dec.code == 0, dec.err


@pytest.mark.parametrize("change,needles", [
    ({"--formula": "age + C(region)"}, ["samples.csv", "line 1", "region"]),
    ({"--formula": "age +"}, ["--formula"]),
    ({"--level": "0"}, ["--level"])])
def test_regress_bad_input(cli, tmp_path, change, needles):
    lay, rd, sm = regress_files(tmp_path)
    args = {"--layout": lay, "--readouts": rd, "--samples": sm, "--formula": "age"}
    args.update(change)
    flat = [x for kv in args.items() for x in kv]
    assert_bad(cli("regress", *flat), *needles)


def test_regress_blank_covariate_names_line_and_column(cli, tmp_path):
    lay, rd, sm = regress_files(tmp_path)
    text = sm.read_text().splitlines()
    text[3] = text[3].split(",")[0] + ",," + text[3].split(",")[2]
    sm.write_text("\n".join(text) + "\n")
    assert_bad(cli("regress", "--layout", lay, "--readouts", rd, "--samples", sm, "--formula",
                   "age"), "samples.csv", "line 4", "column 2")


def test_regress_priors_never_overwrite_the_samples(cli, tmp_path):
    lay, rd, sm = regress_files(tmp_path)
    before = sm.read_bytes()
    assert_bad(cli("regress", "--layout", lay, "--readouts", rd, "--samples", sm, "--formula",
                   "age", "--priors", sm), "--priors would overwrite")
    assert sm.read_bytes() == before
