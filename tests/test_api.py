"""The Python API: top-level names stay what they are, and bad arguments name the Python parameter
while the same mistake on the command line names the flag."""
import importlib
import pkgutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import bayespool
from bayespool.errors import InputError

from .conftest import write_csv

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets" / "demo"

FUNCTIONS = ("read_run", "read_assay", "decode", "plan", "calibrate", "make_design",
             "optimal_dorfman", "simulate", "sweep", "write_report", "assay_curve")


def _import_every_submodule():
    for info in pkgutil.walk_packages(bayespool.__path__, "bayespool."):
        if not info.name.endswith("__main__"):
            importlib.import_module(info.name)


def test_decode_twice_in_one_process():
    run = bayespool.read_run(DEMO / "layout.csv", DEMO / "readouts.csv", DEMO / "samples.csv")
    assay = bayespool.read_assay(DEMO / "assay.toml")
    first = bayespool.decode(run, assay)
    second = bayespool.decode(run, assay)  # the second access used to find a sub-package
    assert np.array_equal(first.probability, second.probability)


def test_every_top_level_name_after_importing_every_submodule():
    _import_every_submodule()
    for name in bayespool.__all__:
        obj = getattr(bayespool, name)
        assert not isinstance(obj, type(bayespool)), f"bayespool.{name} is a module"
    for name in FUNCTIONS:
        assert callable(getattr(bayespool, name)), name
        assert getattr(bayespool, name).__name__ == name
    assert issubclass(bayespool.InputError, ValueError)


def test_top_level_names_in_a_fresh_interpreter():
    # a fresh process: nothing imported before, every submodule imported, then every name
    code = ("import bayespool, pkgutil, importlib\n"
            "[importlib.import_module(m.name) for m in pkgutil.walk_packages(bayespool.__path__, "
            "'bayespool.') if not m.name.endswith('__main__')]\n"
            "import types\n"
            "bad = [n for n in bayespool.__all__ if isinstance(getattr(bayespool, n), "
            "types.ModuleType)]\n"
            "print(bad)\n")
    res = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True)
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == "[]"


@pytest.mark.parametrize("name", FUNCTIONS)
def test_options_are_keyword_only(name):
    import inspect
    params = inspect.signature(getattr(bayespool, name)).parameters.values()
    positional = [p.name for p in params if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD)]
    # only the data a call is about may be positional
    allowed = {"read_run": ["layout", "readouts", "samples"], "read_assay": ["path"],
               "decode": ["run", "assay"], "plan": ["run", "assay"],
               "calibrate": ["validation", "run"], "make_design": ["scheme", "samples"],
               "optimal_dorfman": ["prevalence", "assay"], "simulate": ["scheme", "samples"],
               "sweep": ["scheme", "samples"], "write_report": ["path"],
               "assay_curve": ["assay"]}
    assert positional == allowed[name]


# ---- one mistake, two spellings: the Python parameter, and the flag on the command line
@pytest.fixture(scope="module")
def demo():
    run = bayespool.read_run(DEMO / "layout.csv", DEMO / "readouts.csv", DEMO / "samples.csv")
    return run, bayespool.read_assay(DEMO / "assay.toml")


def _demo_args(command, tmp_path, *extra):
    return [command, "--layout", DEMO / "layout.csv", "--readouts", DEMO / "readouts.csv",
            "--samples", DEMO / "samples.csv", "--assay", DEMO / "assay.toml",
            "--out", tmp_path / "out.csv", *extra]


LIBRARY_CASES = [
    # (call, parameter named in the message)
    (lambda r, a: bayespool.decode(r, a, damping=2), "damping"),
    (lambda r, a: bayespool.decode(r, a, tolerance=0), "tolerance"),
    (lambda r, a: bayespool.decode(r, a, max_sweeps=0), "max_sweeps"),
    (lambda r, a: bayespool.decode(r, a, method="magic"), "method"),
    (lambda r, a: bayespool.decode(r, a, negative_below=0), "negative_below"),
    (lambda r, a: bayespool.decode(r, a, negative_below=0.5, positive_above=0.4),
     "negative_below"),
    (lambda r, a: bayespool.decode(r, a, seed=-1), "seed"),
    (lambda r, a: bayespool.decode(r, a, seed=1.5), "seed"),
    (lambda r, a: bayespool.decode(r, a, method="gibbs", gibbs_options={"chains": 0}),
     'gibbs_options["chains"]'),
    (lambda r, a: bayespool.plan(r, a, tests=0), "tests"),
    (lambda r, a: bayespool.plan(r, a, tests=2, max_pool_size=0), "max_pool_size"),
    (lambda r, a: bayespool.plan(r, a, tests=2, n_draws=3), "n_draws"),
    (lambda r, a: bayespool.plan(r, a, tests=2, min_information=-1), "min_information"),
    (lambda r, a: bayespool.plan(r, a, tests=2, max_draws=-1), "max_draws"),
    (lambda r, a: bayespool.read_run(DEMO / "layout.csv", prevalence=1.5), "prevalence"),
    (lambda r, a: bayespool.calibrate(DEMO / "invented_validation.csv", level=0.2), "level"),
    (lambda r, a: bayespool.calibrate(DEMO / "invented_validation.csv", model="magic"), "model"),
    (lambda r, a: bayespool.calibrate(DEMO / "invented_validation.csv", gof_draws=-1),
     "gof_draws"),
    (lambda r, a: bayespool.make_design("dorfman", 20, pool_size=0), "pool_size"),
    (lambda r, a: bayespool.make_design("kautz-singleton", 10), "positives"),
    (lambda r, a: bayespool.make_design("dorfman", 20, pool_size=4, fill="rows"), "fill"),
    (lambda r, a: bayespool.make_design("random", 20, pools=5, pools_per_sample=0),
     "pools_per_sample"),
    (lambda r, a: bayespool.make_design("dorfman", 20, pool_size=8, max_pool_size=4),
     "max_pool_size"),
    (lambda r, a: bayespool.optimal_dorfman(0.0), "prevalence"),
    (lambda r, a: bayespool.simulate("dorfman", 20, prevalence=0.1, pool_size=4, runs=0), "runs"),
    (lambda r, a: bayespool.simulate("dorfman", 20, prevalence=0.1), "pool_size"),
    (lambda r, a: bayespool.simulate("dorfman", 20, prevalence=2.0, pool_size=4), "prevalence"),
    (lambda r, a: bayespool.simulate("dorfman", 20, prevalence=0.1, pool_size=4, seed="x"),
     "seed"),
    (lambda r, a: bayespool.estimate_prevalence(_pools(), level=2), "level"),
    (lambda r, a: bayespool.estimate_prevalence(_pools(), per=-5), "per"),
    (lambda r, a: bayespool.estimate_prevalence(_pools(), interval="magic"), "interval"),
    (lambda r, a: bayespool.estimate_prevalence(_pools(), interval="bayes", prior=(0, 1)),
     "prior"),
    (lambda r, a: bayespool.estimate_prevalence(_pools(), by=["site", "site"]), "by"),
    (lambda r, a: bayespool.fit_regression(r, a, formula=""), "formula"),
    (lambda r, a: bayespool.fit_regression(r, a, formula="1", link="magic"), "link"),
    (lambda r, a: _worklist(pool_volume=-1), "pool_volume"),
    (lambda r, a: _worklist(prefix=" "), "prefix"),
    (lambda r, a: _worklist(plate_size=100), "plate_size"),
]


def _pools():
    return bayespool.read_pools(ROOT / "datasets" / "surveillance" / "pools.csv")


def _worklist(**options):
    import pandas as pd

    from bayespool.worklist import build_worklist
    layout = pd.DataFrame({"pool": ["P1", "P1"], "sample": ["S1", "S2"]})
    samples = pd.DataFrame({"sample": ["S1", "S2"], "plate": ["A", "A"], "well": ["A1", "B1"]})
    return build_worklist(layout, samples, **options)


@pytest.mark.parametrize("call,parameter", LIBRARY_CASES)
def test_library_errors_name_the_python_parameter(demo, call, parameter):
    with pytest.raises(InputError) as info:
        call(*demo)
    message = str(info.value)
    assert parameter in message and "--" not in message, message
    assert parameter in info.value.parameters


CLI_CASES = [
    # (command line after the command's inputs, flag named on stderr)
    (("decode", "--damping", "2"), "--damping"),
    (("decode", "--tolerance", "0"), "--tolerance"),
    (("decode", "--max-sweeps", "0"), "--max-sweeps"),
    (("decode", "--negative-below", "0"), "--negative-below"),
    (("decode", "--negative-below", "0.5", "--positive-above", "0.4"), "--negative-below"),
    (("decode", "--method", "gibbs", "--chains", "0"), "--chains"),
    (("decode", "--method", "gibbs", "--gibbs-sweeps", "2"), "--gibbs-sweeps"),
    (("decode", "--method", "gibbs", "--prevalence-prior", "1,x"), "--prevalence-prior"),
    (("decode", "--prevalence", "1.5"), "--prevalence"),
    (("plan", "--tests", "0"), "--tests"),
    (("plan", "--tests", "2", "--max-pool-size", "0"), "--max-pool-size"),
    (("plan", "--tests", "2", "--posterior-draws", "3"), "--posterior-draws"),
    (("plan", "--tests", "2", "--min-information", "-1"), "--min-information"),
    (("plan", "--tests", "2", "--max-draws", "-1"), "--max-draws"),
]


@pytest.mark.parametrize("argv,flag", CLI_CASES)
def test_command_line_errors_name_the_flag(cli, tmp_path, argv, flag):
    res = cli(*_demo_args(argv[0], tmp_path, *argv[1:]))
    assert res.code == 2, res.err
    lines = res.err.strip().splitlines()
    assert len(lines) == 1 and flag in lines[0], res.err
    assert "_" not in lines[0].split("error:", 1)[1].split(" ")[1], lines[0]
    assert not (tmp_path / "out.csv").exists()


OTHER_CLI_CASES = [
    (("calibrate", "--validation", DEMO / "invented_validation.csv", "--level", "0.2",
      "--no-plot"), "--level"),
    (("calibrate", "--validation", DEMO / "invented_validation.csv", "--gof-draws", "-1",
      "--no-plot"), "--gof-draws"),
    (("design", "--scheme", "dorfman", "--samples", "20", "--pool-size", "0"), "--pool-size"),
    (("design", "--scheme", "kautz-singleton", "--samples", "10"), "--positives"),
    (("design", "--scheme", "dorfman", "--samples", "20", "--pool-size", "4", "--fill", "rows"),
     "--fill"),
    (("design", "--scheme", "random", "--samples", "20", "--pools", "5",
      "--pools-per-sample", "0"), "--pools-per-sample"),
    (("design", "--scheme", "dorfman", "--samples", "20", "--pool-size", "8",
      "--max-pool-size", "4"), "--max-pool-size"),
    (("simulate", "--scheme", "dorfman", "--samples", "20", "--prevalence", "0.1",
      "--pool-size", "4", "--runs", "0"), "--runs"),
    (("simulate", "--scheme", "dorfman", "--samples", "20", "--prevalence", "0.1"),
     "--pool-size"),
    (("simulate", "--scheme", "dorfman", "--samples", "20", "--prevalence", "0.1",
      "--pool-size", "40", "--max-pool-size", "32"), "--max-pool-size"),
    (("simulate", "--scheme", "dorfman", "--samples", "20", "--prevalence", "2",
      "--pool-size", "4"), "--prevalence"),
]


@pytest.mark.parametrize("argv,flag", OTHER_CLI_CASES)
def test_other_commands_name_the_flag(cli, tmp_path, argv, flag):
    out = tmp_path / ("out.toml" if argv[0] == "calibrate" else "out.csv")
    res = cli(*argv, "--out", out)
    assert res.code == 2, res.err
    lines = res.err.strip().splitlines()
    assert len(lines) == 1 and flag in lines[0], res.err
    assert not out.exists()


def test_renamed_replaces_only_the_parameter_as_a_whole_word():
    err = InputError("q must be a prime (GF(q) is built as integers mod q), got 4",
                     parameters=("q",))
    assert str(err.renamed(lambda p: "--" + p)) == ("--q must be a prime (GF(q) is built as "
                                                     "integers mod q), got 4")
    err = InputError("tests must be at least 1, got 0", "x.csv", parameters=("tests",))
    assert str(err.renamed(lambda p: "--" + p)) == "x.csv: --tests must be at least 1, got 0"
    plain = InputError("something unrelated to tests")
    assert str(plain.renamed(lambda p: "--" + p)) == "something unrelated to tests"


@pytest.mark.parametrize("value,ok", [(0, True), (7, True), (np.int64(3), True), (None, True),
                                      (-1, False), (1.0, False), (True, False), ("3", False)])
def test_check_seed(value, ok):
    from bayespool.validation import check_seed
    if ok:
        assert isinstance(check_seed(value), np.random.Generator)
    else:
        with pytest.raises(InputError, match="seed"):
            check_seed(value)
    g = np.random.default_rng(5)
    assert check_seed(g) is g
    # a whole number is reproducible: numpy's own default_rng stream
    assert check_seed(5).random() == np.random.default_rng(5).random()


def test_samples_file_with_wrong_prior_still_names_file_line_and_column(tmp_path):
    sm = write_csv(tmp_path / "samples.csv", [("S0001", "0.1"), ("S0002", "2")],
                   ["sample", "prior"])
    with pytest.raises(InputError) as info:
        bayespool.read_run(DEMO / "layout.csv", DEMO / "readouts.csv", sm)
    assert "samples.csv" in str(info.value) and "line 3" in str(info.value)


def test_posterior_by_specimen_id(demo):
    run, assay = demo
    post = bayespool.decode(run, assay)
    frame = post.to_frame()
    sid = str(run.sample_ids[7])
    row = post[sid]
    assert frame.index.name == "sample"
    got = frame.loc[sid]
    assert row["probability"] == got["probability"] and row["call"] == got["call"]
    assert sid in post and "no such specimen" not in post
    with pytest.raises(KeyError):
        post["no such specimen"]
    text = repr(post)
    assert "\n" not in text and text.startswith("Posterior(") and len(text) < 200


def _readme_python_block():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## From Python\n", 1)[1].split("\n## ", 1)[0]
    return section.split("```python\n", 1)[1].split("```", 1)[0]


def test_readme_from_python_runs_as_written_and_matches_the_command_line(tmp_path, monkeypatch,
                                                                          cli):
    from bayespool.demo import run_demo
    import pandas as pd
    run_demo(tmp_path / "bayespool-demo")
    monkeypatch.chdir(tmp_path)
    space = {}
    exec(compile(_readme_python_block(), "README.md", "exec"), space)
    assert (tmp_path / "bayespool-demo" / "from-python.html").exists()
    # the frame equals what the command line writes for the same inputs
    d = tmp_path / "bayespool-demo"
    res = cli("decode", "--layout", d / "layout.csv", "--readouts", d / "readouts.csv",
              "--samples", d / "samples.csv", "--assay", d / "assay.toml", "--prevalence",
              "0.02", "--seed", "1", "--out", tmp_path / "cli.csv")
    assert res.code == 0, res.err
    written = pd.read_csv(tmp_path / "cli.csv", dtype=str, keep_default_na=False)
    frame = space["frame"].reset_index(drop="sample" in space["frame"].columns)
    assert list(written["sample"]) == [str(s) for s in frame["sample"]]
    # the file holds 10 significant digits (io.write_frame): the same numbers, as written
    assert list(written["probability"]) == ["%.10g" % p for p in frame["probability"]]
    assert list(written["call"]) == list(frame["call"])
    assert space["one"]["probability"] == frame["probability"].iloc[0]


def test_advice_names_parameters_in_python_and_flags_on_the_command_line(demo, cli, tmp_path):
    # past runs cannot separate sensitivity from prevalence and specificity (Hui & Walter 1980):
    # the advice says what to fix, as Python spells it, and as the command line spells it
    run, _ = demo
    fit = bayespool.calibrate(run=run, model="constant")
    text = " ".join(fit.warnings)
    assert 'fixed["specificity"]' in text and "(validation)" in text
    assert "--" not in text and "--" not in str(fit)
    with pytest.raises(InputError) as info:
        fit.check_identified()
    assert "--" not in str(info.value) and "allow_unidentified" in str(info.value)
    res = cli("calibrate", "--layout", DEMO / "layout.csv", "--readouts", DEMO / "readouts.csv",
              "--model", "constant", "--no-plot", "--out", tmp_path / "a.toml")
    assert res.code == 2 and "--fix specificity=VALUE" in res.err and "--validation" in res.err
    assert "--allow-unidentified" in res.err
    # the Dorfman optimum's text names the limit the same two ways
    opt = bayespool.optimal_dorfman(0.001, max_pool_size=8)
    assert "max_pool_size limit" in str(opt)
    res = cli("design", "--scheme", "dorfman", "--optimize", "--prevalence", "0.001",
              "--max-pool-size", "8")
    assert res.code == 0 and "--max-pool-size limit" in res.out
