"""A fit from past runs that the data cannot identify never silently becomes the assay.

Reference: Hui, S. L. & Walter, S. D. (1980), Biometrics 36(1), 167-171: without a gold standard a
latent-class model is identified only when the data carry at least as many independent rates as
free parameters. One pool size with individual follow-up shows two dilutions (1 and k), fewer than
the three parameters of the dilution curve; pools without follow-up give one positive rate per pool
size for three parameters (prevalence, Se, Sp).
"""
import json

import numpy as np

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity

from .test_calibrate_latent import dorfman_runs
from .test_cli_bad_input import assert_bad


def past_runs(tmp_path, sizes, follow_up, assay, seed=9, n=800):
    layout, readouts, _ = dorfman_runs(np.random.default_rng(seed), n, sizes, 0.05, assay,
                                       follow_up=follow_up)
    layout.to_csv(tmp_path / "layout.csv", index=False)
    readouts.to_csv(tmp_path / "readouts.csv", index=False)
    return ["calibrate", "--layout", tmp_path / "layout.csv", "--readouts",
            tmp_path / "readouts.csv", "--intervals", "wald"]


def test_dilution_curve_from_one_pool_size_is_refused_with_advice_that_fits(cli, tmp_path):
    args = past_runs(tmp_path, [16], True, Assay(0.99, DilutionSensitivity(0.97, 30.0, 1.5)))
    out = tmp_path / "assay.toml"
    res = cli(*args, "--model", "dilution", "--out", out)
    assert_bad(res, "do not identify the assay", "Hui & Walter", "only 2 pool size(s) (1, 16)",
               "another pool size", "--allow-unidentified", "no assay file was written")
    # the runs hold individual follow-up tests: the advice does not ask for them
    assert "individual follow-up" not in res.err
    assert not out.exists()
    assert not any(tmp_path.glob("assay-curve.*"))


def test_pools_without_follow_up_are_told_to_add_it(cli, tmp_path):
    args = past_runs(tmp_path, [5], False, Assay(0.98, ConstantSensitivity(0.9)), seed=8, n=1000)
    res = cli(*args, "--model", "constant", "--out", tmp_path / "assay.toml", "--no-plot")
    assert_bad(res, "no individual tests", "add the individual follow-up tests",
               "--fix specificity=VALUE", "--validation")


def test_allow_unidentified_writes_the_fit_marked_as_such(cli, tmp_path):
    args = past_runs(tmp_path, [16], True, Assay(0.99, DilutionSensitivity(0.97, 30.0, 1.5)))
    out = tmp_path / "assay.toml"
    res = cli(*args, "--model", "dilution", "--out", out, "--allow-unidentified", "--json")
    assert res.code == 0, res.err
    assert json.loads(res.out)["identifiable"] is False
    assert Assay.read(out).details["identified"] is False
    # the plot beside it says so in its title
    assert "not identified by the data" in (tmp_path / "assay-curve.svg").read_text()


def test_identified_fit_is_written_without_the_option(cli, tmp_path):
    # two pool sizes plus follow-up and se_max fixed: three dilutions for two curve parameters
    args = past_runs(tmp_path, [4, 24], True, Assay(0.99, DilutionSensitivity(1.0, 30.0, 1.5)),
                     seed=31, n=1600)
    out = tmp_path / "assay.toml"
    res = cli(*args, "--model", "dilution", "--fix", "se_max=1", "--out", out, "--no-plot")
    assert res.code == 0, res.err
    assert Assay.read(out).details["identified"] is True
