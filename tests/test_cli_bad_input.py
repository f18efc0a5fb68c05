"""Every bad-input case of the foundation issue through the command line: exit 2, one line on stderr
naming the file (and line/column where they apply), no output written, an existing output untouched."""
import subprocess
import sys
from pathlib import Path

import pytest

from .conftest import write_csv

ROOT = Path(__file__).resolve().parents[1]

GOOD_ASSAY = 'specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n'


@pytest.fixture
def files(tmp_path):
    lay = write_csv(tmp_path / "layout.csv", [("P1", "a"), ("P1", "b"), ("P2", "b"), ("P2", "c")],
                    ["pool", "sample"])
    rd = write_csv(tmp_path / "readouts.csv", [("P1", "positive"), ("P2", "negative")],
                   ["pool", "result"])
    sm = write_csv(tmp_path / "samples.csv", [("a", 0.1), ("b", 0.2), ("c", 0.05)],
                   ["sample", "prior"])
    assay = tmp_path / "assay.toml"
    assay.write_text(GOOD_ASSAY)
    return {"layout": lay, "readouts": rd, "samples": sm, "assay": assay, "dir": tmp_path}


def decode_args(f, **over):
    args = {"--layout": f["layout"], "--readouts": f["readouts"], "--samples": f["samples"],
            "--assay": f["assay"], "--out": f["dir"] / "post.csv"}
    args.update(over)
    out = ["decode"]
    for k, v in args.items():
        if v is not None:
            out += [k, str(v)]
    return out


def assert_bad(res, *needles):
    assert res.code == 2, (res.code, res.out, res.err)
    lines = res.err.strip().splitlines()
    assert len(lines) == 1, res.err
    assert "Traceback" not in res.err
    for n in needles:
        assert str(n) in lines[0], (n, lines[0])


def test_good_input_decodes(cli, files):
    res = cli(*decode_args(files))
    assert res.code == 0, res.err
    text = (files["dir"] / "post.csv").read_text()
    assert text.startswith("sample,probability,call")


def test_missing_column(cli, files):
    write_csv(files["layout"], [("P1", "a")], ["pool", "specimen"])
    assert_bad(cli(*decode_args(files)), "layout.csv", "'sample'")


def test_empty_file(cli, files):
    files["readouts"].write_text("")
    assert_bad(cli(*decode_args(files)), "readouts.csv", "empty")


def test_not_utf8(cli, files):
    files["layout"].write_bytes(b"pool,sample\nP1,a\nP1,\xe9b\n")
    assert_bad(cli(*decode_args(files)), "layout.csv", "line 3", "UTF-8")


def test_sample_twice_in_one_pool(cli, files):
    write_csv(files["layout"], [("P1", "a"), ("P1", "b"), ("P1", "a")], ["pool", "sample"])
    assert_bad(cli(*decode_args(files)), "layout.csv", "line 4", "column 2", "twice")


def test_readout_of_pool_not_in_layout(cli, files):
    write_csv(files["readouts"], [("P1", "pos"), ("P9", "neg")], ["pool", "result"])
    assert_bad(cli(*decode_args(files)), "readouts.csv", "line 3", "column 1", "P9")


def test_unknown_result_word(cli, files):
    write_csv(files["readouts"], [("P1", "POS"), ("P2", "maybe")], ["pool", "result"])
    assert_bad(cli(*decode_args(files)), "readouts.csv", "line 3", "column 2", "maybe")


def test_invalid_rows_are_skipped_with_a_note(cli, files):
    write_csv(files["readouts"], [("P1", "Positive"), ("P2", "invalid"), ("P2", "0")],
              ["pool", "result"])
    res = cli(*decode_args(files))
    assert res.code == 0 and "invalid" in res.err


@pytest.mark.parametrize("prior", ["0", "1", "1.5", "-0.1", "abc", "nan"])
def test_prior_outside_open_interval(cli, files, prior):
    write_csv(files["samples"], [("a", 0.1), ("b", prior)], ["sample", "prior"])
    assert_bad(cli(*decode_args(files)), "samples.csv", "line 3", "column 2")


@pytest.mark.parametrize("prev", ["0", "1", "nan", "-1", "2", "x"])
def test_prevalence_outside_open_interval_or_nan(cli, files, prev):
    assert_bad(cli(*decode_args(files, **{"--prevalence": prev})), "prevalence")


@pytest.mark.parametrize("toml,needle", [
    ('specificity = 1.2\n[sensitivity]\nmodel = "constant"\nvalue = 0.9\n', "specificity"),
    ('specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = -0.1\n', "value"),
    ('specificity = 0.99\n[sensitivity]\nmodel = "dilution"\nse_max = 1.01\nr50 = 2.0\nslope = 1.0\n',
     "se_max"),
    ('specificity = 0.99\n[sensitivity]\nmodel = "magic"\nvalue = 0.9\n', "unknown sensitivity model"),
    ('specificity = 0.99\n[sensitivity\nmodel = "constant"\n', "line 2"),
    ('specificity = 0.99\n[sensitivity]\nmodel = "table"\n[[sensitivity.table]]\npool_size = 4\n'
     'positives = 1\nvalue = 0.9\n', "pool size 2"),
])
def test_bad_assay_files(cli, files, toml, needle):
    files["assay"].write_text(toml)
    assert_bad(cli(*decode_args(files)), "assay.toml", needle)


def test_missing_input_file(cli, files):
    assert_bad(cli(*decode_args(files, **{"--layout": files["dir"] / "nope.csv"})), "nope.csv",
               "not found")


def test_missing_output_folder(cli, files):
    assert_bad(cli(*decode_args(files, **{"--out": files["dir"] / "no" / "post.csv"})),
               "does not exist")


def test_impossible_readouts_under_perfect_assay(cli, files):
    files["assay"].write_text('specificity = 1.0\n[sensitivity]\nmodel = "constant"\nvalue = 1.0\n')
    write_csv(files["layout"], [("P1", "a"), ("P2", "a"), ("P2", "b"), ("P3", "b")],
              ["pool", "sample"])
    write_csv(files["readouts"], [("P1", "neg"), ("P2", "pos"), ("P3", "neg")], ["pool", "result"])
    assert_bad(cli(*decode_args(files)), "readouts.csv", "P2", "cannot be explained")


def test_failed_run_leaves_existing_output_untouched(cli, files):
    out = files["dir"] / "post.csv"
    out.write_text("precious\n")
    write_csv(files["readouts"], [("P1", "pos"), ("P2", "what")], ["pool", "result"])
    assert_bad(cli(*decode_args(files)), "readouts.csv")
    assert out.read_text() == "precious\n"
    assert [p.name for p in files["dir"].iterdir() if p.name.startswith(".post")] == []


def test_failed_run_writes_no_output(cli, files):
    write_csv(files["readouts"], [("P1", "pos"), ("P2", "what")], ["pool", "result"])
    assert_bad(cli(*decode_args(files)), "readouts.csv")
    assert not (files["dir"] / "post.csv").exists()


def test_usage_error_is_one_line():
    res = subprocess.run([sys.executable, "-m", "bayespool", "decode", "--bogus"], cwd=ROOT,
                         capture_output=True, text=True)
    assert res.returncode == 2
    assert len(res.stderr.strip().splitlines()) == 1 and "Traceback" not in res.stderr


def test_console_entry_point_reports_bad_input_without_traceback(files):
    res = subprocess.run([sys.executable, "-m", "bayespool", *decode_args(
        files, **{"--prevalence": "nan"})], cwd=ROOT, capture_output=True, text=True)
    assert res.returncode == 2 and "Traceback" not in res.stderr


def test_empty_layout_and_no_samples_is_a_clear_error(cli, files):
    write_csv(files["layout"], [], ["pool", "sample"])
    write_csv(files["readouts"], [], ["pool", "result"])
    assert_bad(cli(*decode_args(files, **{"--samples": None})), "layout.csv", "no samples")
