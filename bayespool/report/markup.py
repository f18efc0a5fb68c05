"""Small builders of HTML fragments: elements, generic tables from DataFrames and from dicts.

Every value passes through :mod:`.escape`; numbers keep their exact value in ``data-value`` so that
the table script sorts them as numbers and a reader (or a test) can compare them with the CSV files.
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import attr, text

MAX_LIST = 12  # longer sequences are summarised instead of listed


def el(name: str, content: str = "", **attrs) -> str:
    """``<name attrs>content</name>``; ``content`` is markup already, attribute values are escaped.

    A trailing underscore is dropped from attribute names (``class_``), and other underscores become
    hyphens (``data_value``); ``True`` gives a bare attribute, ``None`` and ``False`` leave it out.
    """
    parts = [name]
    for key, value in attrs.items():
        if value is None or value is False:
            continue
        key = key.rstrip("_").replace("_", "-")
        parts.append(key if value is True else f'{key}="{attr(value)}"')
    return f"<{' '.join(parts)}>{content}</{name}>"


def value_html(value) -> str:
    """Display markup of one value of any kind (number, string, list, dict, array), written for
    people: lists as plain comma-separated text, lists of records as tables, nothing shown as
    Python would print it (no brackets, no ``None``, no object reprs)."""
    if value is None:
        return '<span class="muted">none</span>'
    if isinstance(value, Mapping):
        return kv_table(value, nested=True)
    if isinstance(value, pd.DataFrame):
        return frame_table(value, class_="data nested")
    if isinstance(value, (list, tuple, np.ndarray, pd.Series)):
        seq = list(np.asarray(value, dtype=object).ravel()) if not isinstance(value, (list, tuple)) \
            else list(value)
        if not seq:
            return '<span class="muted">none</span>'
        if all(isinstance(v, Mapping) for v in seq):
            return frame_table(pd.DataFrame(seq), class_="data nested")
        if all(fmt.is_number(v) for v in seq) and len(seq) > MAX_LIST:
            arr = np.asarray(seq, dtype=float)
            return text(f"{len(arr)} values: min {fmt.number(np.nanmin(arr))}, median "
                        f"{fmt.number(np.nanmedian(arr))}, max {fmt.number(np.nanmax(arr))}")
        shown = ", ".join(_scalar(v) for v in seq[:MAX_LIST])
        more = f", \u2026 ({len(seq) - MAX_LIST} more)" if len(seq) > MAX_LIST else ""
        return f"{shown}{text(more)}"
    return _scalar(value)


def _scalar(value) -> str:
    if isinstance(value, Mapping) or isinstance(value, (list, tuple, np.ndarray)):
        return value_html(value)
    if value is None:
        return '<span class="muted">none</span>'
    if fmt.is_number(value) or isinstance(value, (bool, np.bool_)):
        return text(fmt.number(value))
    return text(fmt.words(value))


def kv_table(data: Mapping, nested: bool = False, class_: str = "kv") -> str:
    """A two-column table of a dict's keys and values (nested dicts as nested tables)."""
    if not data:
        return '<span class="muted">none</span>'
    rows = "".join(el("tr", el("th", text(fmt.label(k)), scope="row") + el("td", value_html(v)))
                   for k, v in data.items())
    return el("table", el("tbody", rows), class_=f"{class_} nested" if nested else class_)


def num_cell(value, display: str | None = None, **attrs) -> str:
    """A ``td`` for a number: exact value in ``data-value``, readable text inside."""
    v = float(value)
    shown = display if display is not None else fmt.number(value)
    return el("td", text(shown), class_="num", data_value=fmt.exact(v), **attrs)


def frame_table(frame: pd.DataFrame, class_: str = "data", caption: str | None = None,
                formats: Mapping | None = None, row_attrs=None) -> str:
    """An HTML table of every column of ``frame``; ``formats`` maps a column to a display function."""
    formats = dict(formats or {})
    head = "".join(el("th", text(fmt.label(c)), scope="col", data_key=c,
                      data_type="num" if _numeric(frame[c]) else "text") for c in frame.columns)
    body = []
    numeric = {c: _numeric(frame[c]) for c in frame.columns}
    for i, row in enumerate(frame.itertuples(index=False, name=None)):
        cells = []
        for c, v in zip(frame.columns, row):
            show = formats.get(c)
            if numeric[c] and not _missing(v):
                cells.append(num_cell(v, show(v) if show else None))
            elif _missing(v):
                cells.append(el("td", "", class_="blank"))
            elif isinstance(v, (bool, np.bool_)) and not show:
                cells.append(el("td", text(fmt.number(v))))
            else:
                cells.append(el("td", text(show(v)) if show else value_html(v)))
        extra = row_attrs(i) if row_attrs else {}
        body.append(el("tr", "".join(cells), **extra))
    cap = el("caption", text(caption)) if caption else ""
    return el("table", cap + el("thead", el("tr", head)) + el("tbody", "".join(body)),
              class_=class_)


def _numeric(series: pd.Series) -> bool:
    return pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series)


def _missing(v) -> bool:
    try:
        return v is None or (isinstance(v, float) and np.isnan(v)) or v is pd.NA
    except TypeError:  # pragma: no cover - exotic values
        return False


def section(id_: str, title: str, body: str, lead: str | None = None) -> str:
    """A top-level report section with its heading (``title`` and ``lead`` are trusted text)."""
    intro = el("p", lead, class_="lead") if lead else ""
    return el("section", el("h2", title) + intro + body, id=id_, aria_labelledby=None)


def facts(items) -> str:
    """A definition list of (term, markup) pairs, skipping pairs whose markup is None."""
    body = "".join(el("dt", term) + el("dd", value) for term, value in items if value is not None)
    return el("dl", body, class_="facts")
