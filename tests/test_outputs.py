"""A user's files are sacred: no command writes over one of its inputs or over another of its
outputs (also through a symbolic or hard link), and outputs get the mode a plain ``open()`` gives
under the user's umask, or keep the mode of the file they replace.

Reference: POSIX file modes (a new file is created 0666 masked by the umask; umask 022 gives
0644), checked with ``os.stat``; common practice for shared laboratory drives.
"""
import os
import stat

import pytest

from .conftest import write_csv
from .test_cli_bad_input import assert_bad

ASSAY = 'specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n'


@pytest.fixture
def f(tmp_path):
    files = {
        "layout": write_csv(tmp_path / "layout.csv", [("P1", "a"), ("P1", "b"), ("P2", "b"),
                                                      ("P2", "c")], ["pool", "sample"]),
        "readouts": write_csv(tmp_path / "readouts.csv", [("P1", "positive"), ("P2", "negative")],
                              ["pool", "result"]),
        "samples": write_csv(tmp_path / "samples.csv", [("a", 0.1), ("b", 0.2), ("c", 0.05)],
                             ["sample", "prior"]),
        "validation": write_csv(tmp_path / "validation.csv",
                                [(4, 1, "positive")] * 8 + [(4, 0, "negative")] * 8,
                                ["pool_size", "positives", "result"]),
        "assay": tmp_path / "assay.toml",
    }
    files["assay"].write_text(ASSAY)
    files["dir"] = tmp_path
    return files


def run_inputs(f):
    return ["--layout", f["layout"], "--readouts", f["readouts"], "--samples", f["samples"],
            "--assay", f["assay"]]


def commands(f):
    """(name, arguments without outputs, output options) for every command with outputs."""
    return {
        "decode": (["decode", *run_inputs(f)], ["--out", "--report"]),
        "plan": (["plan", *run_inputs(f), "--tests", "2"], ["--out", "--report"]),
        "calibrate-validation": (["calibrate", "--validation", f["validation"], "--model",
                                  "constant"], ["--out", "--report"]),
        "calibrate-runs": (["calibrate", "--layout", f["layout"], "--readouts", f["readouts"],
                            "--model", "constant", "--fix", "specificity=0.99", "--no-plot"],
                           ["--out", "--report"]),
        "design": (["design", "--scheme", "dorfman", "--pool-size", "2", "--samples",
                    f["samples"]], ["--out"]),
        "design-optimize": (["design", "--scheme", "dorfman", "--optimize", "--prevalence",
                             "0.05", "--assay", f["assay"], "--samples", "6"], ["--out"]),
        "assay": (["assay", f["assay"]], ["--plot"]),
        "simulate": (["simulate", "--scheme", "dorfman", "--pool-size", "2", "--prevalence",
                      "0.05", "--runs", "5", "--samples", f["samples"], "--assay", f["assay"]],
                     ["--out"]),
    }


CASES = [(cmd, option) for cmd, option in [
    ("decode", "--layout"), ("decode", "--readouts"), ("decode", "--samples"),
    ("decode", "--assay"), ("plan", "--layout"), ("plan", "--readouts"), ("plan", "--samples"),
    ("plan", "--assay"), ("calibrate-validation", "--validation"),
    ("calibrate-runs", "--layout"), ("calibrate-runs", "--readouts"), ("design", "--samples"),
    ("design-optimize", "--assay"), ("simulate", "--samples"), ("simulate", "--assay"),
    ("assay", "ASSAY.toml")]]


def snapshot(f):
    return {k: (v.read_bytes(), v.stat().st_mtime_ns) for k, v in f.items() if k != "dir"}


@pytest.mark.parametrize("cmd, option", CASES)
def test_every_output_of_every_command_refuses_an_input(cli, f, cmd, option):
    args, outputs = commands(f)[cmd]
    target = args[args.index(option) + 1] if option.startswith("--") else args[1]
    before = snapshot(f)
    for out in outputs:
        extra = [o for o in outputs if o != out]
        others = sum(([o, f["dir"] / f"other{o[2:]}.x"] for o in extra), [])
        res = cli(*args, out, target, *others)
        assert_bad(res, "would overwrite the input given as " + option, out)
        assert snapshot(f) == before
        assert not any((f["dir"] / f"other{o[2:]}.x").exists() for o in extra)


@pytest.mark.parametrize("cmd", ["decode", "plan", "calibrate-validation"])
def test_two_outputs_may_not_share_a_path(cli, f, cmd):
    args, outputs = commands(f)[cmd]
    same = f["dir"] / "x.html"
    res = cli(*args, "--out", same, "--report", same)
    assert_bad(res, "--report and --out name the same file")
    assert not same.exists()


def test_calibrate_plot_may_not_overwrite_an_input_or_the_report(cli, f):
    args, _ = commands(f)["calibrate-validation"]
    out = f["dir"] / "fit.toml"
    plot = f["dir"] / "fit-curve.png"
    assert_bad(cli(*args, "--out", out, "--report", plot), "PNG plot beside --out", "--report")
    os.replace(f["validation"], plot)
    args[args.index("--validation") + 1] = plot
    before = plot.read_bytes()
    assert_bad(cli(*args, "--out", out), "PNG plot beside --out", "--validation")
    assert plot.read_bytes() == before and not out.exists()


@pytest.mark.parametrize("link", ["symlink", "hardlink", "relative"])
def test_links_to_an_input_are_refused(cli, f, link, monkeypatch):
    target = f["dir"] / "alias.csv"
    if link == "symlink":
        os.symlink(f["layout"], target)
    elif link == "hardlink":
        os.link(f["layout"], target)
    else:
        monkeypatch.chdir(f["dir"])
        target = "./sub/../layout.csv"
        (f["dir"] / "sub").mkdir()
    before = f["layout"].read_bytes()
    assert_bad(cli("decode", *run_inputs(f), "--out", target), "--layout")
    assert f["layout"].read_bytes() == before


@pytest.fixture
def umask022():
    old = os.umask(0o022)
    yield
    os.umask(old)


def mode(path):
    return stat.S_IMODE(os.stat(path).st_mode)


def test_outputs_get_the_umask_mode(cli, f, umask022):
    d = f["dir"]
    assert cli("decode", *run_inputs(f), "--out", d / "post.csv", "--report",
               d / "report.html").code == 0
    assert cli("calibrate", "--validation", f["validation"], "--model", "constant", "--out",
               d / "fit.toml", "--report", d / "fit.html").code == 0
    assert cli("design", "--scheme", "dorfman", "--pool-size", "2", "--samples", "6", "--out",
               d / "design.csv").code == 0
    for name in ("post.csv", "report.html", "fit.toml", "fit-curve.png", "fit-curve.svg",
                 "fit.html", "design.csv"):
        assert mode(d / name) == 0o644, name
    os.umask(0o077)
    assert cli("decode", *run_inputs(f), "--out", d / "private.csv").code == 0
    assert mode(d / "private.csv") == 0o600


def test_an_existing_output_keeps_its_mode(cli, f, umask022):
    d = f["dir"]
    for name, m in (("post.csv", 0o640), ("report.html", 0o664)):
        (d / name).write_text("old")
        os.chmod(d / name, m)
    assert cli("decode", *run_inputs(f), "--out", d / "post.csv", "--report",
               d / "report.html").code == 0
    assert mode(d / "post.csv") == 0o640 and mode(d / "report.html") == 0o664
    assert (d / "post.csv").read_text().startswith("sample,")


def test_an_output_through_a_link_replaces_the_linked_file(cli, f, umask022):
    d = f["dir"]
    real = d / "real.csv"
    real.write_text("old")
    os.symlink(real, d / "link.csv")
    assert cli("decode", *run_inputs(f), "--out", d / "link.csv").code == 0
    assert (d / "link.csv").is_symlink()
    assert real.read_text().startswith("sample,")


def test_library_report_refuses_to_overwrite_an_input(f):
    from bayespool import Run, read_assay
    from bayespool.decoders import decode
    from bayespool.errors import InputError
    from bayespool.report import write_report
    run = Run.read(f["layout"], f["readouts"], f["samples"])
    post = decode(run, read_assay(f["assay"]))
    before = f["readouts"].read_bytes()
    with pytest.raises(InputError, match="would overwrite the input given as readouts"):
        write_report(f["readouts"], run=run, assay=read_assay(f["assay"]), posterior=post)
    assert f["readouts"].read_bytes() == before
