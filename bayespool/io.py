"""Reading tabular and TOML input with file:line:column errors, and safe atomic output.

Tabular input is UTF-8 text with a header row, separated by commas, semicolons or tabs (detected
from the header line; a semicolon file may write numbers with a decimal comma), or a sheet of an
``.xlsx`` workbook (``book.xlsx`` for its first sheet, ``book.xlsx#Sheet`` for another). Header names
match case-insensitively and may not repeat. Values are kept as stripped strings and converted by
the caller, which reports a bad cell through :meth:`Table.error` (file, line and column; row and
column letter in a workbook).

Output is written to a temporary file beside the target and renamed into place, so a failed run
never touches an existing output; the file gets the mode a plain ``open()`` would give it (the
user's umask), or keeps the mode of the file it replaces. :func:`check_outputs` refuses an output
path that is an input or another output of the same command, after resolving links.
"""
from __future__ import annotations

import contextlib
import csv
import io
import os
import re
import stat
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError

try:  # Python >= 3.11
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as tomllib


class Table:
    """A table read as strings, with what is needed to point at a cell in an error.

    ``header`` holds the column names as matched (stripped, lower case); ``delimiter`` the
    separator of a text file (``None`` for a workbook sheet or a DataFrame).
    """

    delimiter: str | None = ","
    unit = "line"  # what line_of counts: file lines here, sheet or DataFrame rows in subclasses

    def __init__(self, frame: pd.DataFrame, path: str, header: list[str],
                 delimiter: str | None = ","):
        self.frame = frame
        self.path = path
        self.header = header
        self.delimiter = delimiter

    def __len__(self) -> int:
        return len(self.frame)

    def column_number(self, name: str) -> int:
        return self.header.index(name) + 1

    def line_of(self, row: int) -> int:
        """1-based file line of data row ``row`` (0-based), counting the header and blank lines."""
        return _line_of_row(self.path, row)

    def error(self, message: str, row: int | None = None, column: str | None = None) -> InputError:
        line = None if row is None else self.line_of(int(row))
        col = None if column is None else self.column_number(column)
        return InputError(message, self.path, line, col)

    def lines(self, rows) -> list[int]:
        """File lines (rows of a sheet) of several data rows, for notes that name them."""
        return [self.line_of(int(r)) for r in rows]

    def numbers(self, column: str) -> tuple[np.ndarray, np.ndarray]:
        """A numeric column as floats, and which cells are given (not blank).

        Blank cells are NaN and not given; a given cell that is not a number is NaN too, for the
        caller to refuse with its own message. In a semicolon-separated file a decimal comma is
        read as a decimal point (``0,05``), as spreadsheets in many locales save them.
        """
        raw = self.frame[column].astype(str).str.strip()
        given = (raw != "").to_numpy()
        if self.delimiter == ";":
            raw = raw.str.replace(",", ".", regex=False)
        values = pd.to_numeric(raw.where(given, "nan"), errors="coerce").to_numpy(dtype=float)
        return values, given


class FrameTable(Table):
    """A DataFrame given to the library, as strings; errors name the 0-based row and the column."""

    unit = "row"

    def __init__(self, frame: pd.DataFrame, name: str, required: list[str], what: str):
        frame = frame.reset_index(drop=True)
        header = match_header(list(frame.columns), required, what, name, line=None)
        f = frame.astype(object).where(frame.notna(), "").astype(str)
        f = f.apply(lambda c: c.str.strip()) if len(f.columns) else f
        f.columns = header
        super().__init__(f, name, header, None)

    def line_of(self, row: int) -> int:
        return int(row)

    def error(self, message: str, row: int | None = None, column: str | None = None) -> InputError:
        return InputError(message, self.path, None if row is None else int(row), column,
                          unit="row")


class SheetTable(Table):
    """A sheet of a workbook read as strings; errors name the sheet's row and column letter."""

    unit = "row"

    def __init__(self, frame: pd.DataFrame, path: str, header: list[str], rows: list[int],
                 columns: list[str]):
        super().__init__(frame, path, header, None)
        self.rows, self.letters = rows, columns

    def line_of(self, row: int) -> int:
        return self.rows[row]

    def error(self, message: str, row: int | None = None, column: str | None = None) -> InputError:
        line = None if row is None else self.line_of(int(row))
        col = None if column is None else self.letters[self.header.index(column)]
        return InputError(message, self.path, line, col, unit="row")


def _line_of_row(path: str, row: int) -> int:
    # Only used on the error path: count non-blank lines after the header.
    with open(path, encoding="utf-8", newline="") as fh:
        seen = -1  # the header is row -1
        for lineno, text in enumerate(fh, start=1):
            if text.strip() == "":
                continue
            if seen == row:
                return lineno
            seen += 1
    return lineno  # pragma: no cover - row past the end


def _check_utf8(path: str, raw: bytes) -> str:
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        before = raw[: exc.start]
        line = before.count(b"\n") + 1
        column = exc.start - (before.rfind(b"\n") + 1) + 1
        raise InputError(f"not UTF-8 text (byte 0x{raw[exc.start]:02x})", path, line, column) from None


def split_sheet(path: str | os.PathLike) -> tuple[str, str | None]:
    """``("book.xlsx", "Sheet")`` for ``book.xlsx#Sheet``; any other path is returned whole."""
    path = str(path)
    head, sep, sheet = path.rpartition("#")
    if sep and head.lower().endswith(".xlsx"):
        return head, sheet
    return path, None


def is_workbook(path: str | os.PathLike) -> bool:
    return split_sheet(path)[0].lower().endswith(".xlsx")


def _existing_file(path: str, what: str) -> Path:
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} file not found", path)
    if p.is_dir():
        raise InputError(f"{what} file is a folder", path)
    return p


DELIMITERS = (",", ";", "\t")


def detect_delimiter(header_line: str) -> str:
    """The separator of a header line: whichever of comma, semicolon and tab it holds most of
    (a comma on a tie or when there is none, a one-column file)."""
    counts = [header_line.count(d) for d in DELIMITERS]
    return DELIMITERS[int(np.argmax(counts))] if max(counts) else ","


def match_header(names: list, required: list[str], what: str, path: str, *,
                 labels: list[str] | None = None, line: int = 1, unit: str = "line") -> list[str]:
    """Header names as matched (stripped, lower case); repeated or missing names are refused.

    ``labels`` name the columns in messages (1, 2, ... for text files; A, B, ... for a sheet);
    ``line`` is the header's line (or row).
    """
    header = [str(c).strip().lower() for c in names]
    labels = labels or [str(i + 1) for i in range(len(header))]
    seen: dict[str, int] = {}
    for i, name in enumerate(header):
        if name in seen and name != "":
            raise InputError(f"column {name!r} appears twice in the header (columns "
                             f"{labels[seen[name]]} and {labels[i]}); rename or remove one",
                             path, line, unit=unit)
        seen.setdefault(name, i)
    missing = [c for c in required if c not in header]
    if missing:
        shown = ", ".join(str(c).strip() for c in names)
        raise InputError(f"{what} file lacks column{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(repr(c) for c in missing)} (header has {shown})",
                         path, line, unit=unit)
    return header


def read_table(path: str | os.PathLike, required: list[str], what: str) -> Table:
    """Read a table as strings; check it exists, is UTF-8, is not empty, and has ``required``.

    Comma-, semicolon- or tab-separated text (detected from the header line), or a sheet of an
    ``.xlsx`` workbook (``book.xlsx#Sheet`` names one; the first sheet otherwise).
    """
    path = str(path)
    if is_workbook(path):
        from .xlsx import read_sheet
        return read_sheet(path, required, what)
    p = _existing_file(path, what)
    raw = p.read_bytes()
    text = _check_utf8(path, raw)
    if text.startswith("\ufeff"):
        text = text[1:]
        raw = raw[len("\ufeff".encode()):]
    if not text or text.isspace():
        raise InputError(f"{what} file is empty (expected a header with {', '.join(required)})", path)
    first = next(line for line in text.splitlines() if line.strip())
    delimiter = detect_delimiter(first)
    names = next(csv.reader([first], delimiter=delimiter))
    header = match_header(names, required, what, path)
    del text
    try:  # bytes and object columns: markedly faster than text and string columns on big files
        frame = pd.read_csv(io.BytesIO(raw), dtype=object, encoding="utf-8", sep=delimiter,
                            keep_default_na=False, na_filter=False, skipinitialspace=True)
    except pd.errors.ParserError as exc:
        match = re.search(r"line (\d+)", str(exc))
        line = int(match.group(1)) if match else None
        raise InputError(f"not a well-formed table ({str(exc).strip()})", path, line) from None
    if len(frame.columns) != len(header):  # pragma: no cover - pandas read the header otherwise
        raise InputError("the header could not be read as one row of names", path, 1)
    frame.columns = header
    if _may_need_strip(raw, delimiter):
        for c in required:
            frame[c] = frame[c].str.strip()
    return Table(frame, path, header, delimiter)


class CodedTable(Table):
    """Two ID columns of a CSV file read as integer codes (first appearance order) and the distinct
    IDs, as ``pd.factorize`` would give them; ``frame`` (those two columns as strings) is built only
    if asked for."""

    def __init__(self, path: str, header: list[str], codes: dict, ids: dict):
        self.path, self.header, self.codes, self.ids = path, header, codes, ids
        self._frame = None

    @property
    def frame(self) -> pd.DataFrame:
        if self._frame is None:
            self._frame = pd.DataFrame({c: self.ids[c][self.codes[c]] for c in self.codes})
        return self._frame

    def __len__(self) -> int:
        return len(next(iter(self.codes.values())))

    def value(self, column: str, row: int) -> str:
        return str(self.ids[column][self.codes[column][row]])


FAST_FROM_BYTES = 1 << 20  # files at least this large may take the direct path of read_id_table


def read_id_table(path: str | os.PathLike, columns: tuple[str, str], what: str) -> Table:
    """Read a CSV file whose two ``columns`` are IDs, for factorising them.

    Large plain files (ASCII, no quote characters, no whitespace but line ends, the same number of
    fields on every line, distinct header names) are scanned straight into codes (numba), which
    is several times faster than parsing strings and factorising them on millions of rows; any
    other file is read by :func:`read_table` (the same values, and all its checks and errors).
    """
    path = str(path)
    p = Path(path)
    if not is_workbook(path) and p.is_file() and p.stat().st_size >= FAST_FROM_BYTES:
        raw = p.read_bytes()
        table = _scan_ids(path, raw, columns)
        if table is not None:
            return table
    return read_table(path, list(columns), what)


def _scan_ids(path: str, raw: bytes, columns: tuple[str, str]):
    head_end = raw.find(b"\n")
    if head_end <= 0 or not raw[:head_end].isascii():
        return None
    first = raw[:head_end].decode("ascii")
    delimiter = detect_delimiter(first)
    if _may_need_strip(raw, delimiter) or b'"' in raw or b"\x00" in raw:
        return None
    header = first.lower().split(delimiter)
    if len(set(header)) != len(header) or "" in header or not set(columns) <= set(header):
        return None
    from .csvscan import factorize_ranges, split_fields
    data = np.frombuffer(raw, dtype=np.uint8)
    lines = raw.count(b"\n") + 1
    ranges = [np.empty(lines, dtype=np.int64) for _ in range(4)]
    col_a, col_b = header.index(columns[0]), header.index(columns[1])
    rows = split_fields(data, head_end + 1, ord(delimiter), len(header), col_a, col_b, *ranges)
    if rows <= 0:
        return None
    codes, ids = {}, {}
    for name, (starts, ends) in ((columns[0], ranges[:2]), (columns[1], ranges[2:])):
        c = np.empty(rows, dtype=np.int32)
        distinct = factorize_ranges(data, starts, ends, rows, c).tobytes().decode("ascii")
        codes[name] = c
        ids[name] = np.array(distinct.split("\n")[:-1], dtype=object)
    table = CodedTable(path, header, codes, ids)
    table.delimiter = delimiter
    return table


_SPACE_BYTES = (b" ", b"\t", b"\r", b"\x0b", b"\x0c", b"\x1c", b"\x1d", b"\x1e", b"\x1f")


def _may_need_strip(raw: bytes, delimiter: str = ",") -> bool:
    """False when no value can have surrounding whitespace: ASCII text whose only whitespace is
    the newline ending each line, and the tab separating fields in a tab-separated file (then
    stripping every value, which costs seconds on millions of rows, changes nothing)."""
    sep = delimiter.encode()
    return not raw.isascii() or any(b in raw for b in _SPACE_BYTES if b != sep)


def read_toml(path: str | os.PathLike, what: str) -> dict:
    """Read a TOML file; malformed TOML is an InputError with its line and column."""
    path = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} file not found", path)
    raw = p.read_bytes()
    text = _check_utf8(path, raw)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        match = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        line = col = None
        if match:
            line, col = int(match.group(1)), int(match.group(2))
            msg = msg[: match.start()].strip()
        raise InputError(f"malformed TOML: {msg}", path, line, col) from None


def check_output_path(path: str | os.PathLike) -> Path:
    """Fail early, before any work, when the output folder is missing."""
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"output folder {str(folder)!r} does not exist", str(path))
    if target.is_dir():
        raise InputError("output path is a folder", str(path))
    return target


def _same_file(a: str, b: str) -> bool:
    """Whether two paths name one file: the same path once links are resolved, or (for files
    that exist) the same file on disk, which also catches hard links."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def check_outputs(outputs: dict, inputs: dict | None = None) -> None:
    """Refuse, before any work, an output that would overwrite an input or another output.

    ``outputs`` and ``inputs`` map a name to show (an option such as ``--out``, or a parameter
    name) to a path or None; a workbook input ``book.xlsx#Sheet`` stands for ``book.xlsx``. Each
    output must also lie in an existing folder (:func:`check_output_path`).
    """
    given_in = [(n, split_sheet(p)[0]) for n, p in (inputs or {}).items() if p is not None]
    given_out = [(n, str(p)) for n, p in outputs.items() if p is not None]
    for i, (name, path) in enumerate(given_out):
        check_output_path(path)
        for other, src in given_in:
            if _same_file(path, src):
                raise InputError(f"{name} would overwrite the input given as {other} "
                                 f"({src}); write the output to another file", path)
        for other, earlier in given_out[:i]:
            if _same_file(path, earlier):
                raise InputError(f"{name} and {other} name the same file; give each output its "
                                 "own path", path)


def _umask() -> int:
    """The process's umask, read without changing it where the system shows it."""
    with contextlib.suppress(OSError, ValueError):
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _output_mode(target: Path) -> int:
    """The mode the output gets: that of the file it replaces, else what ``open()`` would give."""
    try:
        return stat.S_IMODE(os.stat(target).st_mode)
    except FileNotFoundError:
        return 0o666 & ~_umask()


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, mode: str = "w"):
    """Yield an open temporary file beside ``path``; rename it into place only on success.

    A link is followed: the file it points to is replaced, as a plain ``open()`` would write it.
    The new file gets the replaced file's mode, or the user's umask for a new one (the temporary
    file's private mode would otherwise survive the rename).
    """
    target = check_output_path(os.path.realpath(path))
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=str(target.parent))
    try:
        with os.fdopen(fd, mode, encoding=None if "b" in mode else "utf-8",
                       newline=None if "b" in mode else "") as fh:
            yield fh
        os.chmod(tmp, _output_mode(target))
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_frame(frame: pd.DataFrame, path: str | os.PathLike, float_format: str = "%.10g") -> None:
    """Write a DataFrame as CSV, atomically.

    Frames of plain columns (float64, integer, bool, object or string) are formatted column by
    column and written by the csv module directly: the same bytes as ``DataFrame.to_csv`` (which
    uses that writer too), in about half the time on a million rows. Other frames go through pandas.
    """
    with atomic_output(path) as fh:
        cells = _plain_cells(frame, float_format)
        if cells is None:
            frame.to_csv(fh, index=False, float_format=float_format, lineterminator="\n")
        else:
            writer = csv.writer(fh, lineterminator="\n")
            writer.writerow(frame.columns)
            writer.writerows(zip(*cells))


def _plain_cells(frame: pd.DataFrame, float_format: str):
    """Per column, the values as ``to_csv`` writes them (NaN and None as ''); None if some column
    has another kind of data (dates, categories, ...) or the frame has a non-default header."""
    if (not len(frame.columns) or not all(isinstance(c, str) for c in frame.columns)
            or frame.columns.has_duplicates):
        return None
    cells = []
    for name in frame.columns:
        col = frame[name]
        dtype = col.dtype
        if dtype == np.float64:
            values = col.to_numpy()
            if len(values) and (values == values[0]).all():  # e.g. one prior for every sample
                cells.append([float_format % values[0]] * len(values))
                continue
            text = [float_format % v for v in values.tolist()]
            missing = np.flatnonzero(np.isnan(values))
            for r in missing.tolist():
                text[r] = ""
            cells.append(text)
        elif dtype.kind in "iub" and isinstance(dtype, np.dtype):
            cells.append(col.to_numpy().tolist() if dtype.kind != "b" else
                         ["True" if v else "False" for v in col.to_numpy().tolist()])
        elif dtype == object or isinstance(dtype, pd.StringDtype):
            values = col.to_numpy(dtype=object)
            missing = pd.isna(values)
            if missing.any():
                values = values.copy()
                values[missing] = ""
            cells.append(values.tolist())
        else:
            return None
    return cells


def write_text(text: str, path: str | os.PathLike) -> None:
    """Write text, atomically."""
    with atomic_output(path) as fh:
        fh.write(text)
