"""Worklists: every membership transferred once, equal volumes filling each pool, valid wells.

The checks are properties that follow from what a worklist is (each specimen of a pool of k gives
pool_volume / k, so the pool is a k-fold dilution of each member: common practice for pooled qPCR)
and from the plate formats (96 = 8 x 12, 384 = 16 x 24 wells, ANSI/SLAS 1-2004, common practice).
"""
from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from bayespool.design import dorfman_design, random_design
from bayespool.errors import InputError
from bayespool.plates import FORMATS, parse_well
from bayespool.worklist import COLUMNS, build_worklist


def _samples(n, plate_size=96, volume=None):
    rows, cols = FORMATS[plate_size]
    per = rows * cols
    out = []
    for i in range(n):
        plate, cell = divmod(i, per)
        r, c = divmod(cell, cols)
        row = {"sample": f"X{i}", "plate": f"SRC{plate + 1}", "well": f"{chr(65 + r)}{c + 1}"}
        if volume is not None:
            row["volume_ul"] = str(volume)
        out.append(row)
    return pd.DataFrame(out)


def _check(wl, layout, samples, pool_volume, plate_size):
    f = wl.frame
    assert list(f.columns) == COLUMNS
    # every membership exactly once
    got = sorted(zip(f["pool"], f["sample"]))
    assert got == sorted(zip(layout["pool"].astype(str), layout["sample"].astype(str)))
    # volumes: equal within a pool, summing to the pool volume
    for pool, g in f.groupby("pool"):
        assert np.allclose(g["volume_ul"], g["volume_ul"].iloc[0])
        assert abs(g["volume_ul"].sum() - pool_volume) < 1e-9 * pool_volume
        # one destination well per pool
        assert g[["destination_plate", "destination_well"]].drop_duplicates().shape[0] == 1
    dest = f.drop_duplicates("pool")
    assert not dest.duplicated(["destination_plate", "destination_well"]).any()
    n_rows, n_cols = FORMATS[plate_size]
    for w in dest["destination_well"]:
        r, c = parse_well(w)
        assert 0 <= r < n_rows and 0 <= c < n_cols
    # source wells are those of the samples file
    where = samples.set_index("sample")
    assert (f["source_well"].to_numpy() == where.loc[f["sample"], "well"].to_numpy()).all()
    assert (f["source_plate"].to_numpy() == where.loc[f["sample"], "plate"].to_numpy()).all()


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 300), k=st.integers(1, 64), plate_size=st.sampled_from([96, 384]),
       volume=st.sampled_from([50.0, 100.0, 200.0, 37.5]))
def test_dorfman_worklist_properties(n, k, plate_size, volume):
    samples = _samples(n, plate_size)
    layout = dorfman_design(list(samples["sample"]), pool_size=k).layout
    wl = build_worklist(layout, samples, pool_volume=volume, plate_size=plate_size, prefix="N")
    _check(wl, layout, samples, volume, plate_size)
    pools = layout["pool"].nunique()
    assert len(wl.destinations) == -(-pools // (plate_size))


@settings(max_examples=25, deadline=None)
@given(n=st.integers(2, 200), w=st.integers(1, 3), pools=st.integers(3, 150),
       plate_size=st.sampled_from([96, 384]), seed=st.integers(0, 1000))
def test_random_design_worklist_properties(n, w, pools, plate_size, seed):
    w = min(w, pools)
    assume(math.comb(pools, w) >= n)  # a set of pools of its own for every specimen
    samples = _samples(n, 96)
    layout = random_design(list(samples["sample"]), pools_per_sample=w, pools=pools,
                           seed=seed).layout
    wl = build_worklist(layout, samples, pool_volume=200, plate_size=plate_size,
                        reserve=["A1", "H12"])
    _check(wl, layout, samples, 200.0, plate_size)
    assert not ((wl.frame["destination_well"] == "A1") | (wl.frame["destination_well"] == "H12")
                ).any()


def test_pools_laid_down_columns_then_next_plate():
    samples = _samples(100)
    layout = dorfman_design(list(samples["sample"]), pool_size=1).layout
    wl = build_worklist(layout, samples, pool_volume=10, prefix="NEXT")
    dest = wl.frame.drop_duplicates("pool")
    assert list(dest["destination_well"][:9]) == ["A1", "B1", "C1", "D1", "E1", "F1", "G1", "H1",
                                                  "A2"]
    assert list(dest["destination_plate"].unique()) == ["NEXT1", "NEXT2"]
    assert dest["destination_well"].iloc[96] == "A1"


def test_missing_well_is_an_error():
    samples = _samples(5)
    samples.loc[2, "well"] = ""
    layout = dorfman_design(list(samples["sample"]), pool_size=5).layout
    with pytest.raises(InputError, match="X2"):
        build_worklist(layout, samples)
    with pytest.raises(InputError, match="well"):
        build_worklist(layout, samples.drop(columns="well"))


def test_volume_left_and_over_draw():
    samples = _samples(8, volume=60)
    layout = dorfman_design(list(samples["sample"]), pool_size=4).layout
    wl = build_worklist(layout, samples, pool_volume=100)
    assert np.allclose(wl.volumes["left_ul"], 35.0) and np.allclose(wl.volumes["drawn_ul"], 25.0)
    with pytest.raises(InputError, match="has 60 uL"):
        build_worklist(layout, samples, pool_volume=400)


def test_design_worklist_cli(cli, tmp_path):
    samples = _samples(96, volume=150)
    path = tmp_path / "samples.csv"
    samples.to_csv(path, index=False)
    out, wl = tmp_path / "layout.csv", tmp_path / "worklist.csv"
    r = cli("design", "--scheme", "array", "--samples", path, "--out", out, "--worklist", wl,
            "--pool-volume", 120, "--destination-prefix", "NEXT", "--json")
    assert r.code == 0, r.err
    info = json.loads(r.out)
    assert info["worklist"]["pools"] == 20 and info["worklist"]["destination_plates"] == ["NEXT1"]
    f = pd.read_csv(wl, dtype={"volume_ul": float}, keep_default_na=False)
    assert list(f.columns) == COLUMNS and len(f) == 192
    assert info["worklist"]["least_volume_left"]["left_ul"] == pytest.approx(150 - 10 - 15)
    # a count of specimens has no wells: refused before anything is written
    r = cli("design", "--scheme", "dorfman", "--pool-size", 4, "--samples", 20, "--out",
            tmp_path / "x.csv", "--worklist", tmp_path / "y.csv")
    assert r.code == 2 and "well" in r.err and not (tmp_path / "x.csv").exists()
    # the worklist never overwrites an input
    r = cli("design", "--scheme", "dorfman", "--pool-size", 4, "--samples", path, "--out",
            tmp_path / "x.csv", "--worklist", path)
    assert r.code == 2 and "overwrite" in r.err


def test_plan_worklist_respects_draws(cli, tmp_path):
    samples = _samples(40)
    samples["draws_left"] = ["0"] * 20 + ["1"] * 20
    path = tmp_path / "samples.csv"
    samples.to_csv(path, index=False)
    lay, rd = tmp_path / "lay.csv", tmp_path / "rd.csv"
    lay.write_text("pool,sample\n", encoding="utf-8")
    rd.write_text("pool,result\n", encoding="utf-8")
    nxt, wl = tmp_path / "next.csv", tmp_path / "wl.csv"
    r = cli("plan", "--layout", lay, "--readouts", rd, "--samples", path, "--tests", 10,
            "--max-pool-size", 8, "--out", nxt, "--worklist", wl, "--pool-volume", 80)
    assert r.code == 0, r.err
    f = pd.read_csv(wl, keep_default_na=False)
    plan = pd.read_csv(nxt, keep_default_na=False)
    assert sorted(zip(f["pool"], f["sample"])) == sorted(zip(plan["pool"], plan["sample"]))
    used = f["sample"].value_counts()
    assert used.max() <= 1 and not set(used.index) & set(samples["sample"][:20])


def test_plan_keeps_every_specimen_within_its_volume():
    """A plan built by equal-volume transfers never draws more of a specimen than it has: a pool of
    k takes pool_volume / k of each member, so a specimen with 60 uL left joins no pool of fewer
    than 4 at 200 uL (and without ``pool_volume`` the planner does not track volume)."""
    from bayespool import decode, plan, read_assay
    from bayespool.run import Run
    n = 48
    samples = _samples(n)
    samples["volume_ul"] = ["60"] * 24 + ["400"] * 24
    layout = pd.DataFrame({"pool": [f"P{i // 8}" for i in range(n)],
                           "sample": samples["sample"]})
    readouts = pd.DataFrame({"pool": [f"P{t}" for t in range(6)],
                             "result": ["positive", "negative", "positive", "negative",
                                        "positive", "positive"]})
    run = Run.from_frames(layout, readouts, samples)
    assay = read_assay("datasets/demo/assay.toml")
    post = decode(run, assay, seed=1)
    free = plan(run, assay, posterior=post, tests=30, max_pool_size=8, seed=1)
    kept = plan(run, assay, posterior=post, tests=30, max_pool_size=8, seed=1, pool_volume=200)

    def drawn(p):
        f = p.to_frame()
        f = f[f["kind"] != "replicate"]
        k = f.groupby("pool")["sample"].transform("size")
        return (200.0 / k).groupby(f["sample"]).sum()

    have = samples.set_index("sample")["volume_ul"].astype(float)
    assert (drawn(free) > have[drawn(free).index]).any()  # the limit binds in this case
    used = drawn(kept)
    assert len(used) and (used <= have[used.index] + 1e-9).all()
