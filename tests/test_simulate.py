"""Protocol simulation: Dorfman against Kim et al. (2007), batch = per-run, array r + c + 1, errors."""
from __future__ import annotations

import numpy as np
import pytest

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.errors import InputError
from bayespool.simulation import (PROTOCOLS, Outcome, Protocol, make_protocol, simulate, sweep)
from bayespool.simulation import protocol as protocol_module
from bayespool.simulation.characteristics import ratio_estimate, summarise_runs
from bayespool.simulation.protocols.array import ArrayTesting
from bayespool.simulation.protocols.dorfman import DorfmanTesting

PERFECT = Assay(1.0, ConstantSensitivity(1.0))


def kim_2007(p, k, se, sp):
    """Kim et al. (2007), Biometrics 63(4), Dorfman with test error (from memory, references.md)."""
    q = 1 - p
    return {"tests_per_sample": 1 / k + se - (se + sp - 1) * q ** k,
            "sensitivity": se ** 2,
            "specificity": 1 - (1 - sp) * (se - (se + sp - 1) * q ** (k - 1))}


@pytest.mark.parametrize("batch,n,runs,p,k,se,sp", [
    (True, 1000, 2000, 0.05, 5, 0.90, 0.97),
    (True, 1200, 1500, 0.02, 8, 0.95, 0.99),
    (False, 200, 600, 0.10, 4, 0.85, 0.95),
])
def test_dorfman_simulation_agrees_with_kim_2007(batch, n, runs, p, k, se, sp):
    sim = simulate("dorfman", n, prevalence=p, assay=Assay(sp, ConstantSensitivity(se)), runs=runs, seed=11,
                   batch=batch, pool_size=k)
    c = sim.characteristics
    for name, value in kim_2007(p, k, se, sp).items():
        assert c.mcse[name] > 0
        assert abs(c.estimate[name] - value) < 4 * c.mcse[name], name


def test_dorfman_with_dilution_agrees_with_its_closed_form():
    assay = Assay(0.98, DilutionSensitivity(se_max=0.97, r50=6.0, slope=1.3))
    sim = simulate("dorfman", 960, prevalence=0.08, assay=assay, runs=1500, seed=3, pool_size=8)
    c, e = sim.characteristics, sim.expected
    for name in ("tests_per_sample", "sensitivity", "specificity"):
        assert abs(c.estimate[name] - e[name]) < 4 * c.mcse[name], name
    # dilution must matter here, or the check above would not test it
    assert e["sensitivity"] < 0.97 ** 2 - 0.05


def test_batch_path_is_the_per_run_rule():
    assay = Assay(0.95, DilutionSensitivity(se_max=0.95, r50=4.0, slope=1.0))
    # one cohort: both paths read the same random numbers in the same order -> identical results
    for seed in range(20):
        a = simulate("dorfman", 103, prevalence=0.1, assay=assay, runs=1, seed=seed, pool_size=6, batch=True)
        b = simulate("dorfman", 103, prevalence=0.1, assay=assay, runs=1, seed=seed, pool_size=6, batch=False)
        assert a.runs_frame.equals(b.runs_frame)
    # error-free: identical run by run for many runs (same cohorts from the shared stream)
    a = simulate("dorfman", 50, prevalence=0.1, assay=PERFECT, runs=300, seed=4, pool_size=4, batch=True)
    b = simulate("dorfman", 50, prevalence=0.1, assay=PERFECT, runs=300, seed=4, pool_size=4, batch=False)
    assert a.runs_frame.equals(b.runs_frame)
    assert (a.runs_frame["false_positive"] == 0).all() and (a.runs_frame["false_negative"] == 0).all()


def test_batch_outcome_matches_per_run_calls_exactly():
    # Explicit: the per-run protocol through a Tester and run_batch on one cohort.
    assay = Assay(0.9, ConstantSensitivity(0.8))
    truth = np.random.default_rng(0).random(57) < 0.2
    proto = DorfmanTesting(pool_size=5)
    out = proto.run(protocol_module.Tester(truth, assay, np.random.default_rng(9)), None)
    batch = proto.run_batch(truth[None, :], assay, np.random.default_rng(9))
    np.testing.assert_array_equal(batch.calls[0], out.calls)
    np.testing.assert_array_equal(batch.draws[0], out.draws)
    assert batch.tests[0] == out.tests and batch.rounds[0] == out.rounds


def test_mcse_matches_spread_of_replicate_estimates():
    # The reported Monte Carlo standard error should match the standard deviation of independent
    # replicate estimates (common practice for checking MC error estimates).
    assay = Assay(0.97, ConstantSensitivity(0.9))
    est, se = {"tests_per_sample": [], "sensitivity": [], "specificity": []}, \
        {"tests_per_sample": [], "sensitivity": [], "specificity": []}
    for rep in range(40):
        c = simulate("dorfman", 500, prevalence=0.05, assay=assay, runs=100, seed=1000 + rep,
                     pool_size=5).characteristics
        for name in est:
            est[name].append(c.estimate[name])
            se[name].append(c.mcse[name])
    for name in est:
        ratio = np.std(est[name], ddof=1) / np.mean(se[name])
        assert 0.7 < ratio < 1.4, (name, ratio)


def test_array_single_positive_costs_r_plus_c_plus_one():
    # Classic array rule without error: one positive lights one row and one column; the crossing
    # is tested alone: r + c + 1 tests (Phatarfod & Sudbury 1994).
    r, c = 8, 12
    proto = ArrayTesting(rows=r, cols=c)
    rng = np.random.default_rng(0)
    for i in range(r * c):
        truth = np.zeros(r * c, dtype=bool)
        truth[i] = True
        out = proto.run(protocol_module.Tester(truth, PERFECT, rng), None)
        assert out.tests == r + c + 1
        assert out.rounds == 2
        np.testing.assert_array_equal(out.calls, truth)
    # no positive: r + c tests, one round
    out = proto.run(protocol_module.Tester(np.zeros(r * c, bool), PERFECT, rng), None)
    assert out.tests == r + c and out.rounds == 1 and not out.calls.any()


def test_array_two_positives_and_partial_grids():
    proto = ArrayTesting(rows=4, cols=5)
    rng = np.random.default_rng(0)
    truth = np.zeros(45, dtype=bool)  # two full 4 x 5 grids and 5 specimens on a third
    truth[[0, 6, 41]] = True          # grid 1: (0,0) and (1,1) -> 4 crossings; grid 3: one
    out = proto.run(protocol_module.Tester(truth, PERFECT, rng), None)
    stage1 = 9 + 9 + (1 + 5)
    assert out.tests == stage1 + 4 + 1
    np.testing.assert_array_equal(out.calls, truth)
    assert out.draws.max() == 3 and out.draws.min() == 2


class _Scripted(protocol_module.Tester):
    """A tester whose first round returns given readouts (to exercise the one-sided rule)."""

    def __init__(self, first, truth):
        super().__init__(truth, PERFECT, np.random.default_rng(0))
        self._first = np.asarray(first, dtype=bool)

    def read_round(self, ptr, members):
        if self.rounds == 0:
            super().read_round(ptr, members)
            return self._first
        return super().read_round(ptr, members)


def test_array_positive_row_without_positive_column_retests_the_row():
    # Kim et al. (2007) array rule (from memory): rows positive but no column -> the whole row alone
    r, c = 3, 4
    truth = np.zeros(r * c, dtype=bool)
    truth[5] = True  # row 1, column 1
    first = np.zeros(r + c, dtype=bool)
    first[1] = True  # row 1 positive, its column missed (false negative)
    tester = _Scripted(first, truth)
    out = ArrayTesting(rows=r, cols=c).run(tester, None)
    assert out.tests == r + c + c
    np.testing.assert_array_equal(out.calls, truth)


def test_individual_testing_is_se_and_sp():
    assay = Assay(0.9, ConstantSensitivity(0.8))
    sim = simulate("individual", 400, prevalence=0.3, assay=assay, runs=300, seed=2)
    c = sim.characteristics
    assert c.estimate["tests_per_sample"] == 1 and c.estimate["rounds"] == 1
    # binomial facts: Se and Sp of a single test (common practice)
    assert abs(c.estimate["sensitivity"] - 0.8) < 4 * c.mcse["sensitivity"]
    assert abs(c.estimate["specificity"] - 0.9) < 4 * c.mcse["specificity"]
    assert c.max_draws == 1


def test_cohort_from_priors(tmp_path):
    f = tmp_path / "samples.csv"
    rows = ["sample,prior"] + [f"A{i},{0.9 if i < 10 else 0.001}" for i in range(100)]
    f.write_text("\n".join(rows) + "\n", encoding="utf-8")
    sim = simulate("individual", str(f), prevalence=None, assay=PERFECT, runs=200, seed=1)
    assert sim.prevalence is None and sim.expected is None
    assert sim.characteristics.mean_positives == pytest.approx(9.1, abs=0.5)
    assert sim.notes
    with pytest.raises(InputError, match="prevalence"):
        simulate("individual", 10, prevalence=None, assay=PERFECT, runs=2)


def test_ratio_estimator_standard_error():
    # the linearised ratio estimator (Cochran 1977, ch. 6) against a direct computation
    a, b = np.array([3, 5, 2, 6.0]), np.array([4, 6, 3, 8.0])
    r, se = ratio_estimate(a, b)
    rr = a.sum() / b.sum()
    expect = np.sqrt(np.sum((a - rr * b) ** 2) / (4 * 3)) / b.mean()
    assert r == pytest.approx(rr) and se == pytest.approx(expect)
    assert ratio_estimate(np.zeros(3), np.zeros(3)) == (None, None)
    frame = summarise_runs(np.array([[1, 0, 1]], bool), np.array([[1, 1, 0]], bool), [4], [2],
                           np.array([[2, 2, 1]]))
    assert frame.iloc[0][["true_positive", "false_positive", "false_negative", "true_negative",
                          "draws", "max_draws"]].tolist() == [1, 1, 1, 0, 5, 2]


def test_sweep_over_prevalences_and_pool_sizes():
    assay = Assay(0.99, ConstantSensitivity(0.95))
    result = sweep("dorfman", 200, prevalences=[0.01, 0.05], pool_sizes=[4, 8], assay=assay,
                   runs=50, seed=1)
    table = result.table
    assert len(table) == 4
    assert list(table[["prevalence", "pool_size"]].itertuples(index=False, name=None)) == [
        (0.01, 4), (0.01, 8), (0.05, 4), (0.05, 8)]
    assert {"tests_per_sample", "tests_per_sample_se", "expected_tests_per_sample"} <= set(table)
    again = sweep("dorfman", 200, prevalences=[0.01, 0.05], pool_sizes=[4, 8], assay=assay,
                  runs=50, seed=1)
    assert again.table.equals(table)
    with pytest.raises(InputError, match="no pool size"):
        sweep("array", 96, prevalences=[0.01], pool_sizes=[4, 8], runs=5)


def test_registry_and_protocol_options():
    assert {"individual", "dorfman", "array"} <= set(PROTOCOLS)
    with pytest.raises(InputError, match="pool_size"):  # --pool-size on the CLI: test_api.py
        make_protocol("dorfman")
    with pytest.raises(InputError, match="unknown scheme"):
        make_protocol("nope")
    # options a protocol does not take are not passed to it
    assert make_protocol("individual", pool_size=4, rows=3).name == "individual"
    assert make_protocol("dorfman", pool_size=4, rows=3).pool_size == 4
    with pytest.raises(InputError, match="max_pool_size"):
        make_protocol("dorfman", pool_size=40, max_pool_size=32)


def test_a_protocol_written_against_the_interface_runs():
    class Everyone(Protocol):
        name = "everyone-positive"

        def run(self, tester, prior):
            tester.read_round(np.array([0, tester.n]), np.arange(tester.n))
            return tester.outcome(np.ones(tester.n, dtype=bool))

    sim = simulate(Everyone(), 20, prevalence=0.2, assay=PERFECT, runs=30, seed=0)
    c = sim.characteristics
    assert c.estimate["sensitivity"] == 1.0 and c.estimate["specificity"] == 0.0
    assert c.estimate["tests_per_sample"] == pytest.approx(1 / 20)
    assert isinstance(Everyone().run(protocol_module.Tester(np.zeros(3, bool), PERFECT,
                                                            np.random.default_rng(0)), None),
                      Outcome)


def test_progress_bar_goes_to_stderr_only_when_asked(capsys):
    simulate("dorfman", 100, prevalence=0.05, assay=PERFECT, runs=20, seed=0, pool_size=5, progress=True)
    shown = capsys.readouterr()
    assert "/20 [" in shown.err and "run" in shown.err and shown.out == ""
    simulate("dorfman", 100, prevalence=0.05, assay=PERFECT, runs=20, seed=0, pool_size=5, progress=False)
    assert capsys.readouterr().err == ""


def test_simulate_command_shows_no_bar_when_stderr_is_not_a_terminal(cli):
    r = cli("simulate", "--scheme", "individual", "--prevalence", 0.05, "--samples", 20,
            "--runs", 20, "--seed", 0, "--json")
    assert r.code == 0 and "it/s" not in r.err and "run/s" not in r.err
