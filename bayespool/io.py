"""Reading CSV and TOML input with file:line:column errors, and atomic output.

All tabular input is UTF-8 CSV with a header row; values are kept as stripped strings and converted
by the caller, which reports a bad cell through :func:`cell_error`. Output is written to a temporary
file beside the target and renamed into place, so a failed run never touches an existing output.
"""
from __future__ import annotations

import contextlib
import csv
import io
import os
import re
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
    """A CSV file read as strings, with what is needed to point at a cell in an error."""

    def __init__(self, frame: pd.DataFrame, path: str, header: list[str]):
        self.frame = frame
        self.path = path
        self.header = header

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


def read_table(path: str | os.PathLike, required: list[str], what: str) -> Table:
    """Read a CSV file as strings; check it exists, is UTF-8, is not empty, and has ``required``."""
    path = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} file not found", path)
    if p.is_dir():
        raise InputError(f"{what} file is a folder", path)
    raw = p.read_bytes()
    text = _check_utf8(path, raw)
    if text.startswith("\ufeff"):
        text = text[1:]
        raw = raw[len("\ufeff".encode()):]
    if not text or text.isspace():
        raise InputError(f"{what} file is empty (expected a header with {', '.join(required)})", path)
    del text
    try:  # bytes and object columns: markedly faster than text and string columns on big files
        frame = pd.read_csv(io.BytesIO(raw), dtype=object, encoding="utf-8",
                            keep_default_na=False, na_filter=False, skipinitialspace=True)
    except pd.errors.ParserError as exc:
        match = re.search(r"line (\d+)", str(exc))
        line = int(match.group(1)) if match else None
        raise InputError(f"not a well-formed CSV table ({str(exc).strip()})", path, line) from None
    header = [str(c).strip() for c in frame.columns]
    frame.columns = header
    missing = [c for c in required if c not in header]
    if missing:
        raise InputError(f"{what} file lacks column{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(repr(c) for c in missing)} (header has {', '.join(header)})",
                         path, 1)
    dup = [c for c in set(header) if header.count(c) > 1]
    if dup:
        raise InputError(f"column {dup[0]!r} appears twice in the header", path, 1)
    if _may_need_strip(raw):
        for c in required:
            frame[c] = frame[c].str.strip()
    return Table(frame, path, header)


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
    if p.is_file() and p.stat().st_size >= FAST_FROM_BYTES:
        raw = p.read_bytes()
        table = _scan_ids(path, raw, columns)
        if table is not None:
            return table
    return read_table(path, list(columns), what)


def _scan_ids(path: str, raw: bytes, columns: tuple[str, str]):
    if _may_need_strip(raw) or b'"' in raw or b"\x00" in raw:
        return None
    head_end = raw.find(b"\n")
    if head_end <= 0:
        return None
    header = raw[:head_end].decode("ascii").split(",")
    if len(set(header)) != len(header) or "" in header or not set(columns) <= set(header):
        return None
    from .csvscan import factorize_ranges, split_fields
    data = np.frombuffer(raw, dtype=np.uint8)
    lines = raw.count(b"\n") + 1
    ranges = [np.empty(lines, dtype=np.int64) for _ in range(4)]
    col_a, col_b = header.index(columns[0]), header.index(columns[1])
    rows = split_fields(data, head_end + 1, len(header), col_a, col_b, *ranges)
    if rows <= 0:
        return None
    codes, ids = {}, {}
    for name, (starts, ends) in ((columns[0], ranges[:2]), (columns[1], ranges[2:])):
        c = np.empty(rows, dtype=np.int32)
        distinct = factorize_ranges(data, starts, ends, rows, c).tobytes().decode("ascii")
        codes[name] = c
        ids[name] = np.array(distinct.split("\n")[:-1], dtype=object)
    return CodedTable(path, header, codes, ids)


_SPACE_BYTES = (b" ", b"\t", b"\r", b"\x0b", b"\x0c", b"\x1c", b"\x1d", b"\x1e", b"\x1f")


def _may_need_strip(raw: bytes) -> bool:
    """False when no value can have surrounding whitespace: ASCII text whose only whitespace is
    the newline ending each line (then stripping every value, which costs seconds on millions of
    rows, changes nothing)."""
    return not raw.isascii() or any(b in raw for b in _SPACE_BYTES)


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


def check_outputs_apart(outputs, inputs) -> None:
    """Refuse an output path that is one of the inputs (or the same file under another name), and
    two outputs on one path."""
    seen = {}
    for flag, path in outputs.items():
        if not path:
            continue
        target = Path(path).resolve()
        for name, src in inputs.items():
            if src and (Path(src).resolve() == target or
                        (target.exists() and Path(src).exists() and os.path.samefile(src, target))):
                raise InputError(f"{flag} would overwrite the {name} input", str(path))
        if target in seen:
            raise InputError(f"{flag} and {seen[target]} name the same file", str(path))
        seen[target] = flag


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, mode: str = "w"):
    """Yield an open temporary file beside ``path``; rename it into place only on success."""
    target = check_output_path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=str(target.parent))
    try:
        with os.fdopen(fd, mode, encoding=None if "b" in mode else "utf-8",
                       newline=None if "b" in mode else "") as fh:
            yield fh
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
