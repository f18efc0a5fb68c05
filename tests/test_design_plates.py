"""Designs on the specimens' plates: row pools are plate rows, column pools plate columns.

Plate geometry (96 wells = 8 rows A-H x 12 columns, 384 = 16 x 24) is the ANSI/SLAS 1-2004
footprint (common practice); a multichannel pipette takes a plate column (8 channels) or row in one
move (common practice).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bayespool.design import array_design, dorfman_design
from bayespool.errors import InputError
from bayespool.plates import FORMATS, parse_well


def _plates(rng, fill=0.8, formats=(96, 384), column_major=False):
    rows = []
    for p, size in enumerate(formats):
        n_rows, n_cols = FORMATS[size]
        cells = [(r, c) for r in range(n_rows) for c in range(n_cols) if rng.random() < fill]
        rng.shuffle(cells)  # file order unrelated to the plate (e.g. an export in another order)
        for r, c in cells:
            rows.append({"sample": f"P{p}-{r}-{c}", "plate": f"PL{p}",
                         "well": f"{chr(65 + r)}{c + 1:02d}"})
    return pd.DataFrame(rows)


def _where(samples):
    pos = {s: (p, *parse_well(w)) for s, p, w in samples[["sample", "plate", "well"]].itertuples(
        index=False)}
    return pos


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000), fill=st.floats(0.05, 1.0))
def test_every_row_pool_is_a_plate_row_and_every_column_pool_a_plate_column(seed, fill):
    samples = _plates(np.random.default_rng(seed), fill)
    if samples.empty:
        return
    design = array_design(samples)
    pos = _where(samples)
    layout = design.layout
    seen_rows, seen_cols = set(), set()
    for pool, g in layout.groupby("pool"):
        where = [pos[s] for s in g["sample"]]
        plates = {w[0] for w in where}
        assert len(plates) == 1
        if "-row-" in pool:
            rows = {w[1] for w in where}
            assert len(rows) == 1
            key = (plates.pop(), rows.pop())
            # the whole plate row: every specimen in that row of that plate
            expect = {s for s, w in pos.items() if (w[0], w[1]) == key}
            assert set(g["sample"]) == expect and key not in seen_rows
            seen_rows.add(key)
        else:
            assert "-col-" in pool
            cols = {w[2] for w in where}
            assert len(cols) == 1
            key = (plates.pop(), cols.pop())
            expect = {s for s, w in pos.items() if (w[0], w[2]) == key}
            assert set(g["sample"]) == expect and key not in seen_cols
            seen_cols.add(key)
    assert design.properties.pools_per_sample_min == design.properties.pools_per_sample_max == 2


def test_tiles_laid_on_the_plate():
    samples = _plates(np.random.default_rng(1), 1.0, formats=(96,))
    design = array_design(samples, rows=4, cols=6)
    pos = _where(samples)
    for pool, g in design.layout.groupby("pool"):
        where = np.array([pos[s][1:] for s in g["sample"]])
        tile = {(r // 4, c // 6) for r, c in where}
        assert len(tile) == 1  # within one tile
        assert len(g) == (6 if "-row-" in pool else 4)
    assert design.n_pools == 4 * (4 + 6)


@pytest.mark.parametrize("fill", ["columns", "rows"])
def test_dorfman_pools_follow_the_pipette(fill):
    samples = _plates(np.random.default_rng(2), 1.0, formats=(96, 96))
    k = 8 if fill == "columns" else 12
    design = dorfman_design(samples, pool_size=k, fill=fill)
    pos = _where(samples)
    assert design.n_pools == 2 * (12 if fill == "columns" else 8)
    for _, g in design.layout.groupby("pool"):
        where = [pos[s] for s in g["sample"]]
        assert len({w[0] for w in where}) == 1                    # one plate
        line = {w[2] for w in where} if fill == "columns" else {w[1] for w in where}
        assert len(line) == 1                                      # one plate column (row)


def test_dorfman_blocks_never_cross_plates():
    samples = _plates(np.random.default_rng(3), 0.5, formats=(96, 384))
    design = dorfman_design(samples, pool_size=5)
    pos = _where(samples)
    for _, g in design.layout.groupby("pool"):
        assert len({pos[s][0] for s in g["sample"]}) == 1


def test_errors():
    samples = _plates(np.random.default_rng(4), 0.5, formats=(96,))
    samples.loc[0, "well"] = ""
    with pytest.raises(InputError, match="well"):
        array_design(samples)
    with pytest.raises(InputError, match="fill"):  # --fill on the command line: test_api.py
        dorfman_design(20, pool_size=4, fill="rows")
    dup = pd.DataFrame({"sample": ["a", "b"], "plate": ["p", "p"], "well": ["A1", "a01"]})
    with pytest.raises(InputError, match="already given"):
        array_design(dup)


def test_plate_designs_cli(cli, tmp_path):
    samples = _plates(np.random.default_rng(5), 1.0, formats=(96,))
    path = tmp_path / "samples.csv"
    samples.to_csv(path, index=False)
    out = tmp_path / "layout.csv"
    r = cli("design", "--scheme", "dorfman", "--pool-size", 8, "--fill", "columns", "--samples",
            path, "--out", out)
    assert r.code == 0, r.err and "fill = columns" in r.out
    lay = pd.read_csv(out)
    pos = _where(samples)
    assert all(len({pos[s][2] for s in g["sample"]}) == 1 for _, g in lay.groupby("pool"))
    r = cli("design", "--scheme", "dorfman", "--pool-size", 8, "--fill", "rows", "--samples", 40,
            "--out", tmp_path / "x.csv")
    assert r.code == 2 and "--fill" in r.err
