"""The fast paths for million-row files keep the files' meaning and every error's file:line:column.

Reference: pandas itself (read_csv on text with every value stripped, DataFrame.to_csv), i.e. the
straightforward way of reading and writing these files, on inputs chosen to hit each fast path's
edge (spaces, tabs, non-ASCII whitespace, BOM, CRLF, quoting, missing values).
"""
import io

import numpy as np
import pandas as pd
import pytest

from bayespool.errors import InputError
from bayespool.io import read_table, write_frame
from bayespool.run import Run


def reference_read(path):
    text = path.read_bytes().decode("utf-8")
    if text.startswith("\ufeff"):
        text = text[1:]
    frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, na_filter=False,
                        skipinitialspace=True)
    frame.columns = [c.strip() for c in frame.columns]
    for c in ("pool", "sample"):
        frame[c] = frame[c].str.strip()
    return frame


@pytest.mark.parametrize("body", [
    "pool,sample\nP1,S1\nP1,S2\nP2,S1\n",
    "pool,sample\r\nP1,S1\r\nP1,S2\r\n",
    "\ufeffpool,sample\nP1,S1\nP2,S2\n",
    "pool , sample\n P1 , S1 \nP1,\tS2\t\n",
    "pool,sample\nP1,S1\u00a0\nP1,\u3000S2\n",
    'pool,sample,plate\n"P,1",S1,a\n"P ""2""",S2,\n',
    "pool,sample\nP1,S1\n\nP2,S2\n",
    "pool,sample\nÄ1,é1\nÄ1,ü2\n",
])
def test_layout_values_match_a_plain_stripped_pandas_read(tmp_path, body):
    path = tmp_path / "layout.csv"
    path.write_bytes(body.encode("utf-8"))
    table = read_table(path, ["pool", "sample"], "layout")
    ref = reference_read(path)
    assert table.header == list(ref.columns)
    for c in ref.columns:
        assert table.frame[c].tolist() == ref[c].tolist(), c


def test_whitespace_only_file_is_empty(tmp_path):
    path = tmp_path / "layout.csv"
    path.write_text(" \n\u00a0\n", encoding="utf-8")
    with pytest.raises(InputError, match="layout file is empty"):
        read_table(path, ["pool", "sample"], "layout")


@pytest.mark.parametrize("rows, line, column, text", [
    ("P1,S1\nP1,S2\n,S3\n", 4, 1, "empty pool ID"),
    ("P1,S1\nP2,\nP2,S3\n", 3, 2, "empty sample ID"),
    ("P1,S1\nP1,S2\nP2,S1\nP1,S2\n", 5, 2, "sample 'S2' appears twice in pool 'P1'"),
    ("P1,S1\n\nP2,S2\nP2, S2 \n", 5, 2, "sample 'S2' appears twice in pool 'P2'"),
])
def test_layout_errors_point_at_the_first_bad_row(tmp_path, rows, line, column, text):
    lay = tmp_path / "layout.csv"
    lay.write_text("pool,sample\n" + rows, encoding="utf-8")
    with pytest.raises(InputError) as err:
        Run.read(lay)
    assert (err.value.line, err.value.column) == (line, column)
    assert text in err.value.message and err.value.file == str(lay)


def test_ids_keep_first_appearance_order(tmp_path):
    lay = tmp_path / "layout.csv"
    lay.write_text("pool,sample\nB,s3\nB,s1\nA,s2\nA,s3\n", encoding="utf-8")
    run = Run.read(lay)
    assert list(run.pool_ids) == ["B", "A"] and list(run.sample_ids) == ["s3", "s1", "s2"]


def test_counting_sort_csr_matches_a_stable_argsort():
    from bayespool.csr import csr
    rng = np.random.default_rng(0)
    rows = rng.integers(0, 5000, 200_000)
    cols = rng.integers(0, 1 << 30, 200_000)
    ptr, out = csr(rows, cols, 5000)
    order = np.argsort(rows, kind="stable")
    np.testing.assert_array_equal(out, cols[order].astype(np.int32))
    np.testing.assert_array_equal(ptr, np.concatenate([[0], np.cumsum(np.bincount(rows, minlength=5000))]))


def test_write_frame_writes_what_pandas_to_csv_writes(tmp_path):
    frame = pd.DataFrame({
        "sample": ["a", "b,c", 'd"e', "f\ng", None, "h"],
        "probability": [0.1, np.nan, 1e-20, np.inf, -0.0, 1 / 3],
        "pools": np.array([1, 2, 3, 4, 5, -6]),
        "flag": [True, False, True, True, False, False],
        "mixed": [1.5, "x", None, np.nan, 3, "y"],
        "text": pd.array(["a", None, "c", "d", "e", "f"], dtype="string"),
    })
    for f in (frame, frame.iloc[:0], frame[["probability"]],
              pd.DataFrame({"when": pd.to_datetime(["2024-01-01", "2024-01-02"])})):
        path = tmp_path / "out.csv"
        write_frame(f, path)
        assert path.read_text(encoding="utf-8") == f.to_csv(index=False, float_format="%.10g",
                                                             lineterminator="\n")


def test_large_layout_errors_match_the_small_path(tmp_path):
    # past 65,536 memberships the CSR and the repeated-pair search run as O(n) kernels
    n = 70_000
    pools = [f"P{i // 8}" for i in range(n)]
    samples = [f"S{(i * 7919) % 40_000}" for i in range(n)]
    lay = tmp_path / "layout.csv"
    body = "".join(f"{p},{s}\n" for p, s in zip(pools, samples))
    lay.write_text("pool,sample\n" + body, encoding="utf-8")
    run = Run.read(lay)
    pc, sc = pd.factorize(pd.Series(pools))[0], pd.factorize(pd.Series(samples))[0]
    np.testing.assert_array_equal(run.pool_members, sc[np.argsort(pc, kind="stable")])
    np.testing.assert_array_equal(run.sample_pools, pc[np.argsort(sc, kind="stable")])
    lay.write_text("pool,sample\n" + body + f"{pools[10]},{samples[10]}\n" + body[:40],
                   encoding="utf-8")
    with pytest.raises(InputError) as err:
        Run.read(lay)
    assert (err.value.line, err.value.column) == (n + 2, 2)
    assert f"sample '{samples[10]}' appears twice in pool '{pools[10]}'" in err.value.message


LAYOUTS = [
    "pool,sample\nP1,S1\nP1,S2\nP2,S1\nP3,S3\n",
    "pool,sample\nP1,S1\nP1,S2\nP2,S1",                      # no final newline
    "sample,plate,pool\nS1,a,P1\nS2,b,P1\n\nS1,c,P2\n",       # other columns, a blank line
    "pool,sample\nP1,S1\nP1,S2,x\n",                         # a line with a field too many
    "pool,sample\nP1,S1\nP1\n",                              # a line with a field too few
    'pool,sample\n"P1",S1\nP1,S2\n',                         # quotes: pandas reads these
    "pool,sample\r\nP1,S1\r\nP2,S1\r\n",                     # CRLF
    "pool,pool,sample\nP1,P1,S1\n",                          # repeated header name
    "pool,sample\n,S1\nP1,S2\n",                             # empty pool ID
    "pool,sample\nP1,S1\nP1,\n",                             # empty sample ID
    "pool,sample\nP1,S1\nP2,S2\nP1,S1\n",                    # repeated pair
    # other separators and header spellings (tests/test_files.py)
    "pool;sample\nP1;S1\nP1;S2\nP2;S1\n",
    "pool\tsample\nP1\tS1\nP1\tS2\nP2\tS1\n",
    "Pool,Sample\nP1,S1\nP2,S2\n",
    "POOL;plate;SAMPLE\nP1;x;S1\nP1;y;S2\n",
    "pool;sample\nP1;S1\nP1;S2;x\n",                         # a field too many
    "pool\tpool\tsample\nP1\tP1\tS1\n",                       # repeated header name
    "pool\tsample\nP1\t S1\nP1\tS2\n",                        # a space inside a tab file
]


def read_both(tmp_path, monkeypatch, body):
    import bayespool.io as bio
    path = tmp_path / "layout.csv"
    path.write_bytes(body.encode("utf-8"))
    out = []
    for threshold in (1 << 62, 0):  # pandas path, then the direct scan wherever it applies
        monkeypatch.setattr(bio, "FAST_FROM_BYTES", threshold)
        try:
            out.append(Run.read(path))
        except InputError as exc:
            out.append((exc.message, exc.file, exc.line, exc.column))
    return out


@pytest.mark.parametrize("body", LAYOUTS)
def test_direct_scan_of_large_plain_layouts_equals_the_pandas_path(tmp_path, monkeypatch, body):
    slow, fast = read_both(tmp_path, monkeypatch, body)
    if isinstance(slow, tuple):
        assert fast == slow
        return
    assert list(fast.pool_ids) == list(slow.pool_ids)
    assert list(fast.sample_ids) == list(slow.sample_ids)
    for name in ("pool_ptr", "pool_members", "sample_ptr", "sample_pools"):
        np.testing.assert_array_equal(getattr(fast, name), getattr(slow, name))


def test_direct_scan_is_taken_for_a_plain_file(tmp_path, monkeypatch):
    import bayespool.io as bio
    from bayespool.io import CodedTable, read_id_table
    path = tmp_path / "layout.csv"
    path.write_text("pool,sample\nP1,S1\nP1,S2\n", encoding="utf-8")
    monkeypatch.setattr(bio, "FAST_FROM_BYTES", 0)
    table = read_id_table(path, ("pool", "sample"), "layout")
    assert isinstance(table, CodedTable)
    assert table.frame.to_dict("list") == {"pool": ["P1", "P1"], "sample": ["S1", "S2"]}
    path.write_text('pool,sample\n"P1",S1\n', encoding="utf-8")
    assert not isinstance(read_id_table(path, ("pool", "sample"), "layout"), CodedTable)
