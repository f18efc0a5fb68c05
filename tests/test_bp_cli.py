"""`bayespool decode --method bp` and `auto` from the command line."""
import json

import numpy as np
import pandas as pd

from .conftest import write_csv
from .test_bp_order import ASSAY, frames


def write_inputs(tmp_path, seed=0, shuffle=None):
    layout, readouts, samples = frames(np.random.default_rng(seed))
    if shuffle is not None:
        layout = layout.sample(frac=1, random_state=shuffle)
        readouts = readouts.sample(frac=1, random_state=shuffle)
    files = {"layout": tmp_path / "layout.csv", "readouts": tmp_path / "readouts.csv",
             "samples": tmp_path / "samples.csv", "assay": tmp_path / "assay.toml"}
    write_csv(files["layout"], layout.to_numpy(), ["pool", "sample"])
    write_csv(files["readouts"], readouts.to_numpy(), ["pool", "result"])
    write_csv(files["samples"], samples.to_numpy(), ["sample", "prior"])
    ASSAY.write(files["assay"])
    return files


def args_for(files, out, *extra):
    return ("decode", "--layout", files["layout"], "--readouts", files["readouts"], "--samples",
            files["samples"], "--assay", files["assay"], "--out", out, *extra)


def test_decode_bp_json_reports_convergence(cli, tmp_path):
    files = write_inputs(tmp_path)
    out = tmp_path / "posterior.csv"
    res = cli(*args_for(files, out, "--method", "bp", "--json"))
    assert res.code == 0, res.err
    summary = json.loads(res.out)
    assert summary["method"] == "bp"
    assert summary["converged"] is True
    assert summary["sweeps"] >= 2 and summary["residual"] < 1e-8
    assert summary["bp"]["schedule"] == "sequential"
    frame = pd.read_csv(out)
    assert list(frame.columns[:3]) == ["sample", "probability", "call"]
    assert set(frame["method"]) == {"bp"}
    assert frame["probability"].between(0, 1).all()


def test_decode_auto_on_a_large_group_uses_bp_and_says_what_it_chose(cli, tmp_path):
    files = write_inputs(tmp_path)  # one group of 40 linked specimens: above the exact limit
    # by default auto then re-decodes the loopy group by the sampler, starting from BP's answer
    res = cli(*args_for(files, tmp_path / "s.csv", "--json"))
    assert res.code == 0, res.err
    summary = json.loads(res.out)
    assert summary["method"] == "gibbs" and summary["loopy_check"]["samples"] == 40
    assert "re-decoded 1 loopy group(s) (40 samples)" in summary["choice"]
    # without the sampler BP's answer is kept (and marked bp-loopy)
    res = cli(*args_for(files, tmp_path / "p.csv", "--json", "--loopy-sampler-limit", "0"))
    assert res.code == 0, res.err
    summary = json.loads(res.out)
    assert summary["method"] == "bp"
    assert summary["choice"].startswith("auto: bp for 1 group(s) of 40 samples")
    assert summary["converged"] is True


def test_decode_bp_not_converged_warns_on_stderr(cli, tmp_path):
    files = write_inputs(tmp_path)
    res = cli(*args_for(files, tmp_path / "p.csv", "--method", "bp", "--max-sweeps", "1",
                        "--json"))
    assert res.code == 0
    assert "WARNING: belief propagation did not converge" in res.err
    summary = json.loads(res.out)
    assert summary["converged"] is False and summary["sweeps"] == 1


def test_decode_bp_output_does_not_depend_on_file_row_order(cli, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    fa, fb = write_inputs(a, seed=3), write_inputs(b, seed=3, shuffle=9)
    assert cli(*args_for(fa, a / "p.csv", "--method", "bp")).code == 0
    assert cli(*args_for(fb, b / "p.csv", "--method", "bp")).code == 0
    pa = pd.read_csv(a / "p.csv").sort_values("sample").reset_index(drop=True)
    pb = pd.read_csv(b / "p.csv").sort_values("sample").reset_index(drop=True)
    pd.testing.assert_frame_equal(pa, pb)


def test_bad_bp_options_are_one_line_errors(cli, tmp_path):
    files = write_inputs(tmp_path)
    out = tmp_path / "p.csv"
    for extra, text in ((("--max-sweeps", "0"), "--max-sweeps must be at least 1"),
                        (("--damping", "1"), "--damping must be at least 0 and below 1"),
                        (("--tolerance", "-1"), "--tolerance must be a positive number")):
        res = cli(*args_for(files, out, "--method", "bp", *extra))
        assert res.code == 2
        assert text in res.err and "Traceback" not in res.err
        assert len(res.err.strip().splitlines()) == 1
        assert not out.exists()


def test_help_imports_no_heavy_module_and_kernels_are_cached():
    # `bayespool --help` must start fast: building the parser imports neither numba nor pandas;
    # every numba kernel of the decoder is compiled with cache=True, so a second start of the
    # command loads machine code instead of compiling (the start-up figures are in
    # scripts/bench_decode.py)
    import subprocess
    import sys
    from pathlib import Path

    code = ("import sys; from bayespool.cli import build_parser; build_parser().format_help(); "
            "print(sorted(m for m in ('numba', 'pandas', 'scipy') if m in sys.modules))")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=Path(__file__).resolve().parents[1])
    assert res.returncode == 0 and res.stdout.strip() == "[]", res.stdout + res.stderr
    from numba.core.dispatcher import Dispatcher

    from bayespool import csvscan, incidence
    from bayespool.decoders import bp
    kernels = [v for m in (bp, csvscan, incidence) for v in vars(m).values()
               if isinstance(v, Dispatcher)]
    assert len(kernels) >= 15
    for k in kernels:
        assert type(k._cache).__name__ == "FunctionCache", k
