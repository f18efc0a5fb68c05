"""The one protocol every result of bayespool follows, so a notebook and the command line read
results the same way.

A result has

- ``to_frame()``: a :class:`pandas.DataFrame` indexed by the natural ID of its rows (``sample``,
  ``pool_size``, ``parameter``, ``characteristic``, ...; membership tables such as a plan or a
  layout are indexed by ``membership`` and keep ``pool`` and ``sample`` as columns, because they
  are files in the layout format);
- ``summary()``: the dictionary printed by ``--json`` (``json_ready`` turns NaN into null);
- ``str(result)``: the text the command line prints;
- ``repr(result)``: one short line, no arrays.

Result types derive from :class:`Result` and name their one-line description in ``_brief()``.
"""
from __future__ import annotations

import math
from abc import ABC, abstractmethod
from contextlib import contextmanager
from contextvars import ContextVar
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pandas is imported by the results themselves: `bayespool --help` stays light
    import pandas as pd

CAUTION = ("Statistical decision support, not a diagnostic device: confirm results by the "
           "laboratory's validated procedure, local regulations and the responsible licensed "
           "professional.")


class Result(ABC):
    """Base of every result type: ``to_frame``, ``summary``, ``__str__`` and a one-line repr.

    Subclasses that are dataclasses declare ``repr=False`` so this ``__repr__`` stays in force.
    """

    @abstractmethod
    def to_frame(self) -> pd.DataFrame:
        """The result as a table indexed by the natural ID of its rows."""

    @abstractmethod
    def summary(self) -> dict:
        """The dictionary behind ``--json``."""

    @abstractmethod
    def __str__(self) -> str:
        """What the command line prints."""

    @abstractmethod
    def _brief(self) -> str:
        """The inside of the one-line repr (no arrays, no line breaks)."""

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self._brief()})"


_SPELLING: ContextVar = ContextVar("bayespool_spelling", default=None)


def spell(parameter: str) -> str:
    """A parameter as text written for people (warnings, advice, printed results) names it: the
    Python name, or a front end's own spelling while it runs the library (:func:`spelled_as`;
    the command line shows its flags)."""
    names = _SPELLING.get()
    return parameter if names is None else names(parameter)


@contextmanager
def spelled_as(names):
    """Within the block, :func:`spell` spells parameters as ``names(parameter)`` says."""
    token = _SPELLING.set(names)
    try:
        yield
    finally:
        _SPELLING.reset(token)


def membership_index(n: int) -> pd.RangeIndex:
    """The index of a membership table (one row per specimen in a pool)."""
    import pandas as pd
    return pd.RangeIndex(n, name="membership")


def json_ready(value):
    """``value`` with NaN and infinities as None (JSON has no spelling for them) and numpy
    scalars as Python numbers."""
    if isinstance(value, dict):
        return {k: json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_ready(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        try:
            value = value.item()
        except (TypeError, ValueError):
            return value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def file_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """The table as a file holds it: the natural ID back as the first column(s); a membership or
    unnamed index is dropped."""
    names = [n for n in frame.index.names if n is not None and n != "membership"]
    return frame.reset_index() if names else frame.reset_index(drop=True)
