"""Covariates of each specimen from the samples file, expanded by a formula (formulaic).

``age + C(site)`` (a right-hand side, with or without a leading ``~``) gives the columns the
formula library names (``Intercept``, ``age``, ``C(site)[T.b]``, ...). A column of the samples
file whose every value is a number is numeric, any other is categorical. Every specimen of the
layout needs a row in the samples file and every variable the formula uses needs a value; a gap
is an error naming the file, line and column.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ...errors import InputError


@dataclass(frozen=True)
class Design:
    """The model matrix ``X`` (one row per specimen of the run, in the run's order) and the term
    names as the formula library gives them."""

    X: np.ndarray
    terms: list
    formula: str


def _typed(frame: pd.DataFrame, columns) -> pd.DataFrame:
    out = {}
    for c in columns:
        values = frame[c]
        num = pd.to_numeric(values, errors="coerce")
        out[c] = num.astype(float) if num.notna().all() else values.astype(str)
    return pd.DataFrame(out, index=frame.index)


def _first_line(exc: Exception) -> str:
    """The formula library's message without its pointer lines and terminal colours."""
    text = str(exc).strip().splitlines()
    return text[0].strip() if text else type(exc).__name__


def _line(path, row: int):
    from ...io import _line_of_row
    return _line_of_row(str(path), row) if path and not str(path).startswith("<") else None


def design_matrix(run, formula: str) -> Design:
    """The model matrix of ``formula`` over the samples of ``run``.

    Parameters
    ----------
    run : bayespool.run.Run
        A run read with a samples file holding the covariates.
    formula : str
        Right-hand side of a model formula in the formula library's syntax.
    """
    from formulaic import Formula
    from formulaic.errors import FormulaicError

    text = str(formula).strip()
    if text.startswith("~"):
        text = text[1:].strip()
    if not text:
        raise InputError("`formula` is empty: give the covariates, e.g. 'age + C(site)'")
    source = run.sources.get("samples")
    sm = run.samples
    if sm is None:
        raise InputError("`formula` needs a samples file with the covariates of every sample")
    try:
        spec = Formula(text)
        needed = sorted(spec.required_variables)
    except (FormulaicError, SyntaxError, ValueError) as exc:
        raise InputError(f"`formula` {formula!r} cannot be read: {_first_line(exc)}") from None
    header = list(sm.columns)
    for v in needed:
        if v not in header:
            raise InputError(f"`formula` uses {v!r}, which is not a column of the samples file "
                             f"(columns: {', '.join(header)})", source, 1, v)
    have = np.zeros(run.n_samples, dtype=bool)
    have[sm.index.to_numpy()] = True
    if not have.all():
        i = int(np.flatnonzero(~have)[0])
        raise InputError(f"sample {run.sample_ids[i]!r} of the layout has no row in the samples "
                         "file, so no covariates", source)
    for v in needed:
        blank = (sm[v].astype(str).str.strip() == "").to_numpy()
        if blank.any():
            r = int(np.flatnonzero(blank)[0])
            raise InputError(f"sample {sm['sample'].iat[r]!r} has no value for {v!r}", source,
                             _line(source, r), header.index(v) + 1)
    data = _typed(sm, needed)
    data = data.set_axis(sm.index.to_numpy()).sort_index()
    try:
        mm = spec.get_model_matrix(data, na_action="raise")
    except Exception as exc:  # the formula library reports evaluation problems in its own types
        raise InputError(f"`formula` {formula!r} cannot be evaluated: {_first_line(exc)}") from None
    X = np.asarray(mm, dtype=float)
    if X.shape[0] != run.n_samples:  # pragma: no cover - na_action="raise" keeps every row
        raise InputError("`formula` dropped rows of the samples file")
    terms = [str(c) for c in mm.columns]
    if np.linalg.matrix_rank(X) < X.shape[1]:
        raise InputError(f"`formula` {formula!r} gives columns that are not linearly independent "
                         f"({', '.join(terms)}): the coefficients cannot be told apart")
    return Design(X, terms, text)
