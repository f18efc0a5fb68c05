"""Reading a sheet of an ``.xlsx`` workbook as a table of strings (openpyxl).

Laboratories keep layouts and results in spreadsheets; a sheet is read like a text table (the
same header rules, the same checks downstream), with every cell turned into the text a person sees
for it: whole numbers without a decimal point, other numbers in their shortest exact form, dates
in ISO form, empty cells blank. Text cells are kept as they are, so an ID typed as ``007`` stays
``007``. Blank rows are skipped; errors name the sheet's row and column letter.
"""
from __future__ import annotations

import datetime as _dt
import zipfile

import pandas as pd

from .errors import InputError


def cell_text(value) -> str:
    """The text of one cell value as openpyxl gives it."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if value.is_integer() and abs(value) < 1e15:
            return str(int(value))
        return repr(value)
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time)):
        return value.isoformat()
    return str(value).strip()


def _open_sheet(file: str, sheet: str | None, shown: str):
    from openpyxl import load_workbook
    try:
        book = load_workbook(file, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError) as exc:
        raise InputError(f"not a readable .xlsx workbook ({exc})", shown) from None
    if sheet is None:
        return book, book.worksheets[0], book.sheetnames[0]
    if sheet not in book.sheetnames:
        names = ", ".join(repr(n) for n in book.sheetnames)
        book.close()
        raise InputError(f"the workbook has no sheet {sheet!r} (it has {names})", shown)
    return book, book[sheet], sheet


def read_sheet(path: str, required: list[str], what: str):
    """A :class:`bayespool.io.SheetTable` of ``book.xlsx`` (first sheet) or ``book.xlsx#Sheet``."""
    from openpyxl.utils import get_column_letter

    from .io import SheetTable, _existing_file, match_header, split_sheet
    file, sheet = split_sheet(path)
    _existing_file(file, what)
    book, ws, name = _open_sheet(file, sheet, path)
    shown = path if sheet is not None else f"{file}#{name}"
    try:
        rows, numbers = [], []
        for number, values in enumerate(ws.iter_rows(values_only=True), start=1):
            cells = [cell_text(v) for v in values]
            if any(cells):
                rows.append(cells)
                numbers.append(number)
    finally:
        book.close()
    if not rows:
        raise InputError(f"{what} sheet is empty (expected a header with {', '.join(required)})",
                         shown)
    head = rows[0]
    width = max(i + 1 for i, c in enumerate(head) if c)
    letters = [get_column_letter(i + 1) for i in range(width)]
    header = match_header(head[:width], required, what, shown, labels=letters, line=numbers[0],
                          unit="row")
    body = []
    for cells, number in zip(rows[1:], numbers[1:]):
        extra = [i for i in range(width, len(cells)) if cells[i]]
        if extra:
            raise InputError(f"a value beyond the header's last column ({cells[extra[0]]!r})",
                             shown, number, get_column_letter(extra[0] + 1), unit="row")
        body.append(cells[:width] + [""] * (width - len(cells)))
    frame = pd.DataFrame(body, columns=header, dtype=object)
    if not len(body):
        frame = pd.DataFrame({c: pd.Series([], dtype=object) for c in header})
    return SheetTable(frame, shown, header, numbers[1:], letters)
