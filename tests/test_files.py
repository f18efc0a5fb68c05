"""Files as laboratories produce them: separators, header spellings, decimal commas, workbooks,
result words, wells and Ct values, read or refused with file, line and column.

References: the comma-separated reading of the same data (each other form must give the same
posterior to the last digit), pandas' reader for the fast path, openpyxl (the workbook library
itself writes the test workbooks). That spreadsheets in many locales save semicolon-separated files
with a decimal comma, and that plates are 96 (8 x 12) or 384 (16 x 24) wells, is common practice.
"""
import pandas as pd
import pytest

from bayespool.errors import InputError
from bayespool.run import Run

from .conftest import write_csv
from .test_cli_bad_input import assert_bad

LAYOUT = [("P1", "a"), ("P1", "b"), ("P2", "b"), ("P2", "c"), ("P3", "c"), ("P3", "d")]
READOUTS = [("P1", "positive", "31.5"), ("P2", "negative", ""), ("P3", "positive", "28.25")]
SAMPLES = [("a", "0.1", "A1"), ("b", "0.2", "A2"), ("c", "0.05", "B1"), ("d", "0.3", "B2")]
ASSAY = 'specificity = 0.99\n[sensitivity]\nmodel = "constant"\nvalue = 0.95\n'


def write(path, header, rows, sep=",", decimal="."):
    lines = [sep.join(header)]
    for r in rows:
        lines.append(sep.join(v.replace(".", decimal) if _is_number(v) else v for v in r))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _is_number(v):
    try:
        float(v)
        return "." in v
    except ValueError:
        return False


def make_files(folder, sep=",", decimal=".", headers=None):
    h = headers or {"layout": ["pool", "sample"], "readouts": ["pool", "result", "ct"],
                    "samples": ["sample", "prior", "well"]}
    return {"layout": write(folder / "layout.csv", h["layout"], LAYOUT, sep, decimal),
            "readouts": write(folder / "readouts.csv", h["readouts"], READOUTS, sep, decimal),
            "samples": write(folder / "samples.csv", h["samples"], SAMPLES, sep, decimal)}


def decode_cli(cli, files, out, *extra):
    assay = out.parent / "assay.toml"
    assay.write_text(ASSAY)
    return cli("decode", "--layout", files["layout"], "--readouts", files["readouts"],
               "--samples", files["samples"], "--assay", assay, "--out", out, *extra)


@pytest.fixture
def reference(cli, tmp_path):
    folder = tmp_path / "comma"
    folder.mkdir()
    res = decode_cli(cli, make_files(folder), folder / "post.csv")
    assert res.code == 0, res.err
    return (folder / "post.csv").read_text()


@pytest.mark.parametrize("sep, decimal", [(";", ","), (";", "."), ("\t", ".")])
def test_semicolon_and_tab_files_give_the_comma_files_posterior(cli, tmp_path, reference, sep,
                                                                decimal):
    files = make_files(tmp_path, sep, decimal)
    res = decode_cli(cli, files, tmp_path / "post.csv")
    assert res.code == 0, res.err
    assert (tmp_path / "post.csv").read_text() == reference


def test_decimal_comma_is_read_in_prior_and_ct(tmp_path):
    files = make_files(tmp_path, ";", ",")
    assert "0,05" in files["samples"].read_text() and "31,5" in files["readouts"].read_text()
    run = Run.read(files["layout"], files["readouts"], files["samples"])
    assert run.prior.tolist() == [0.1, 0.2, 0.05, 0.3]
    assert run.readout_ct["ct"].tolist()[0] == 31.5 and run.readout_ct["ct"].tolist()[2] == 28.25


def test_decimal_comma_is_refused_in_a_comma_file(cli, tmp_path):
    # in a comma-separated file "0,05" is two fields: the row is malformed, not a number
    files = make_files(tmp_path)
    files["samples"].write_text("sample;prior\na;0,1\n", encoding="utf-8")
    Run.read(files["layout"], None, files["samples"])  # a ';' file: fine
    files["samples"].write_text("sample,prior\na,0.1\nb,0;2\n", encoding="utf-8")
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), "samples.csv", "line 3",
               "column 2", "0;2")


def test_mixed_case_headers_match(cli, tmp_path, reference):
    headers = {"layout": ["Pool", "SAMPLE"], "readouts": [" POOL ", "Result", "Ct"],
               "samples": ["Sample", "Prior", "Well"]}
    res = decode_cli(cli, make_files(tmp_path, headers=headers), tmp_path / "post.csv")
    assert res.code == 0, res.err
    assert (tmp_path / "post.csv").read_text() == reference


@pytest.mark.parametrize("name, header, needle", [
    ("readouts", ["pool", "result", "Result"], "'result' appears twice in the header (columns 2 "
                                                "and 3)"),
    ("layout", ["pool", "sample", "Pool"], "'pool' appears twice"),
    ("samples", ["sample", "prior", "PRIOR"], "'prior' appears twice"),
])
def test_duplicate_headers_are_refused_naming_them(cli, tmp_path, name, header, needle):
    files = make_files(tmp_path)
    rows = {"layout": LAYOUT, "readouts": [r[:2] for r in READOUTS],
            "samples": [r[:2] for r in SAMPLES]}[name]
    write(files[name], header, [r + (r[-1],) for r in rows])
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), f"{name}.csv", "line 1", needle)
    assert not (tmp_path / "post.csv").exists()


def test_plain_semicolon_and_tab_layouts_take_the_fast_scan(tmp_path, monkeypatch):
    import bayespool.io as bio
    from bayespool.io import CodedTable, read_id_table
    monkeypatch.setattr(bio, "FAST_FROM_BYTES", 0)
    for sep in (";", "\t"):
        path = tmp_path / "layout.csv"
        path.write_text(f"Pool{sep}Sample\nP1{sep}S1\nP1{sep}S2\n", encoding="utf-8")
        table = read_id_table(path, ("pool", "sample"), "layout")
        assert isinstance(table, CodedTable) and table.delimiter == sep
        assert table.frame.to_dict("list") == {"pool": ["P1", "P1"], "sample": ["S1", "S2"]}


# ---- workbooks
def workbook(path, sheets):
    from openpyxl import Workbook
    book = Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        ws = book.create_sheet(name)
        for r in rows:
            ws.append(list(r))
    book.save(path)
    return path


def test_xlsx_inputs_give_the_comma_files_posterior(cli, tmp_path, reference):
    book = workbook(tmp_path / "run.xlsx", {
        "Layout": [("Pool", "Sample")] + LAYOUT,
        "Readouts": [("pool", "result", "ct")] + [(p, r, float(c) if c else None)
                                                  for p, r, c in READOUTS],
        "Samples": [("sample", "prior", "well")] + [(s, float(p), w) for s, p, w in SAMPLES]})
    files = {"layout": book, "readouts": f"{book}#Readouts", "samples": f"{book}#Samples"}
    res = decode_cli(cli, files, tmp_path / "post.csv")
    assert res.code == 0, res.err
    assert (tmp_path / "post.csv").read_text() == reference


def test_xlsx_cells_keep_ids_and_skip_blank_rows(tmp_path):
    book = workbook(tmp_path / "lay.xlsx", {"S": [("pool", "sample"), ("P1", "007"), (None, None),
                                                  ("P1", 7), (1, "NA"), (2.0, 0.5)]})
    run = Run.read(book)
    assert list(run.sample_ids) == ["007", "7", "NA", "0.5"]
    assert list(run.pool_ids) == ["P1", "1", "2"]


@pytest.mark.parametrize("rows, needle", [
    ([("pool", "result"), ("P1", "positive"), (None, None), ("P2", "maybe")],
     ["row 4", "column B", "maybe"]),
    ([(None, None), ("pool", "Result", "RESULT"), ("P1", "positive", "x")],
     ["row 2", "'result' appears twice", "columns B and C"]),
    ([("pool", "result"), ("P1", "positive"), ("P9", "negative")], ["row 3", "column A", "P9"]),
    ([("pool", "outcome"), ("P1", "positive")], ["row 1", "lacks column 'result'"]),
])
def test_xlsx_errors_name_row_and_column_letter(cli, tmp_path, rows, needle):
    files = make_files(tmp_path)
    files["readouts"] = workbook(tmp_path / "rd.xlsx", {"Results": rows})
    res = decode_cli(cli, files, tmp_path / "post.csv")
    assert_bad(res, "rd.xlsx#Results", *needle)


def test_xlsx_missing_sheet_and_broken_workbook(cli, tmp_path):
    files = make_files(tmp_path)
    book = workbook(tmp_path / "rd.xlsx", {"A": [("pool", "result")], "B": [("pool", "result")]})
    files["readouts"] = f"{book}#C"
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), "no sheet 'C'", "'A', 'B'")
    (tmp_path / "bad.xlsx").write_bytes(b"not a zip")
    files["readouts"] = tmp_path / "bad.xlsx"
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), "bad.xlsx", "not a readable .xlsx")
    files["readouts"] = tmp_path / "none.xlsx"
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), "none.xlsx", "not found")


# ---- result words
WORDS = [("P1", "Detected"), ("P2", "not  detected"), ("P3", "+"), ("P1", "-"), ("P2", "Reactive"),
         ("P3", "NON-REACTIVE"), ("P1", "inconclusive"), ("P2", "Invalid"), ("P3", "pos")]


def test_usual_result_words(tmp_path):
    files = make_files(tmp_path)
    write_csv(files["readouts"], WORDS, ["pool", "result"])
    with pytest.warns(UserWarning):
        run = Run.read(files["layout"], files["readouts"])
    assert run.n_positive.tolist() == [1, 1, 2] and run.n_negative.tolist() == [1, 1, 1]
    note = run.notes[-1]
    assert "1 inconclusive readout(s) skipped (line 8)" in note
    assert "1 invalid readout(s) skipped (line 9)" in note


def test_laboratory_words_from_the_assay_file_and_the_option(cli, tmp_path):
    files = make_files(tmp_path)
    write_csv(files["readouts"], [("P1", "DET"), ("P2", "ND"), ("P3", "retest")],
              ["pool", "result"])
    assay = tmp_path / "lab.toml"
    assay.write_text(ASSAY + '[results]\npositive = ["DET"]\nnegative = ["nd"]\n')
    args = ["decode", "--layout", files["layout"], "--readouts", files["readouts"], "--assay",
            assay, "--out", tmp_path / "post.csv"]
    assert_bad(cli(*args), "readouts.csv", "line 4", "column 2", "retest", "--result-word")
    res = cli(*args, "--result-word", "retest=skip")
    assert res.code == 0, res.err
    assert "1 retest readout(s) skipped (line 4)" in res.err
    from bayespool.assay import Assay
    run = Run.read(files["layout"], files["readouts"],
                   result_words={**Assay.read(assay).results, "retest": "negative"})
    assert run.n_positive.tolist() == [1, 0, 0] and run.n_negative.tolist() == [0, 1, 1]


def test_malformed_results_table_is_refused(cli, tmp_path):
    files = make_files(tmp_path)
    assay = tmp_path / "lab.toml"
    assay.write_text(ASSAY + '[results]\npositive = "DET"\n')
    res = cli("decode", "--layout", files["layout"], "--readouts", files["readouts"], "--assay",
              assay, "--out", tmp_path / "post.csv")
    assert_bad(res, "lab.toml", "positive")


# ---- wells and Ct
@pytest.mark.parametrize("rows, needle", [
    ([("a", "p1", "A1"), ("b", "p1", "A2"), ("c", "p1", "a01")], ["line 4", "column 3", "'a01'",
                                                                  "already given to sample 'a'"]),
    ([("a", "p1", "A1"), ("b", "p1", "Z99")], ["line 3", "column 3", "Z99", "outside the plate"]),
    ([("a", "p1", "A1"), ("b", "p1", "Q1")], ["line 3", "column 3", "outside the plate"]),
    ([("a", "p1", "A1"), ("b", "p1", "A25")], ["line 3", "column 3", "outside the plate"]),
    ([("a", "p1", "A1"), ("b", "p1", "next to A1")], ["line 3", "column 3", "not a row letter"]),
])
def test_wells_taken_twice_or_off_the_plate_are_refused(cli, tmp_path, rows, needle):
    files = make_files(tmp_path)
    write_csv(files["samples"], rows, ["sample", "plate", "well"])
    assert_bad(decode_cli(cli, files, tmp_path / "post.csv"), "samples.csv", *needle)


def test_same_well_on_two_plates_and_blank_wells_are_fine(tmp_path):
    files = make_files(tmp_path)
    write_csv(files["samples"], [("a", "p1", "A1"), ("b", "p2", "A1"), ("c", "p2", ""),
                                 ("d", "p1", "P24")], ["sample", "plate", "well"])
    run = Run.read(files["layout"], None, files["samples"])
    assert run.samples["well"].tolist() == ["A1", "A1", "", "P24"]


def test_well_error_in_a_dataframe_names_the_row():
    with pytest.raises(InputError, match=r"<samples>, row 1, column well: well 'Z99'"):
        Run.from_frames(pd.DataFrame({"pool": ["P1"], "sample": ["a"]}), None,
                        pd.DataFrame({"Sample": ["a", "b"], "Well": ["A1", "Z99"]}))


def test_negative_with_ct_gets_a_note_naming_lines(cli, tmp_path):
    files = make_files(tmp_path)
    write_csv(files["readouts"], [("P1", "positive", "30"), ("P2", "negative", "35.5"),
                                  ("P3", "negative", ""), ("P3", "neg", "38")],
              ["pool", "result", "ct"])
    res = decode_cli(cli, files, tmp_path / "post.csv")
    assert res.code == 0, res.err
    assert "2 negative readout(s) carry a Ct value (lines 3, 5)" in res.err


def test_bad_input_without_assay_is_one_line(cli, tmp_path):
    files = make_files(tmp_path)
    write_csv(files["readouts"], [("P1", "maybe")], ["pool", "result"])
    res = cli("decode", "--layout", files["layout"], "--readouts", files["readouts"], "--out",
              tmp_path / "post.csv")
    assert_bad(res, "readouts.csv", "maybe")
    res = cli("plan", "--layout", files["layout"], "--readouts", files["readouts"], "--tests", 2,
              "--out", tmp_path / "next.csv")
    assert_bad(res, "readouts.csv", "maybe")
    write_csv(files["readouts"], [("P1", "pos")], ["pool", "result"])
    res = cli("decode", "--layout", files["layout"], "--readouts", files["readouts"], "--out",
              tmp_path / "post.csv")
    assert res.code == 0 and "no --assay given" in res.err


def test_an_error_after_the_inputs_read_is_still_one_line(cli, tmp_path):
    # the default-assay note is held back until the command succeeds
    files = make_files(tmp_path)
    res = cli("plan", "--layout", files["layout"], "--readouts", files["readouts"], "--tests", 0,
              "--out", tmp_path / "next.csv")
    assert_bad(res, "tests")
