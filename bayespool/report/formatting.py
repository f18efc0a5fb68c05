"""How numbers read on the page: short probabilities for cells, precise ones for tables.

The full value of every number in a table is also kept in the cell's ``data-value`` attribute, as
``%.10g``, the precision of the CSV files that bayespool writes, so that the page and the files can be
compared and the table sorted exactly.
"""
from __future__ import annotations

import math
import numbers
import re

import numpy as np


def exact(value) -> str:
    """The value as the CSV files write it (``%.10g``)."""
    return f"{float(value):.10g}"


def prob_short(p) -> str:
    """At most five characters, for plate wells and chart labels: 0, <0.001, 0.052, >0.999, 1."""
    p = float(p)
    if math.isnan(p):
        return "n/a"
    if p == 0.0:
        return "0"
    if p == 1.0:
        return "1"
    if p < 0.0005:
        return "<0.001"
    if p >= 0.9995:
        return ">0.999"
    return f"{p:.3f}"


def prob_long(p) -> str:
    """Four significant figures, with the distance to 0 or 1 shown when it is tiny (1 − 2.5e-06)."""
    p = float(p)
    if math.isnan(p):
        return "n/a"
    if p == 0.0 or p == 1.0:
        return f"{p:g}"
    if p < 1e-4:
        return f"{p:.2e}"
    if p > 1 - 1e-4:
        return f"1 \u2212 {1 - p:.2e}"
    return f"{p:.4g}" if p < 0.001 else f"{p:.4f}"


def number(value) -> str:
    """A general number: integers as they are, others to four significant figures."""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, numbers.Integral):
        return f"{int(value):,}".replace(",", "\u2009")
    v = float(value)
    if math.isnan(v):
        return "n/a"
    if math.isinf(v):
        return "\u221e" if v > 0 else "\u2212\u221e"
    if v == int(v) and abs(v) < 1e15:
        return f"{int(v)}"
    return f"{v:.4g}"


def is_number(value) -> bool:
    return isinstance(value, (numbers.Real, np.number)) and not isinstance(value, (bool, np.bool_))


def label(name) -> str:
    """A column or key name made readable: ``positive_pools`` -> ``positive pools``."""
    return str(name).replace("_", " ")


_REPR = re.compile(r"^([A-Z][A-Za-z0-9]*)\((.*)\)$")


def words(value) -> str:
    """Text for people from a value that may be a program's spelling of something: an object's
    repr such as ``PoolSwapMove(rounds=1)`` reads ``pool swap move (rounds 1)``."""
    s = str(value)
    m = _REPR.match(s.strip())
    if not m:
        return s
    name = re.sub(r"(?<=[a-z0-9])(?=[A-Z])", " ", m.group(1)).lower()
    args = ", ".join(a.strip().replace("=", " ") for a in m.group(2).split(",") if a.strip())
    return f"{name} ({args})" if args else name
