"""Result words: what a readout's ``result`` cell says, read as positive, negative or skipped.

Laboratories write results in many ways; the usual words are understood in any case and with any
spacing (``positive``/``pos``/``1``/``+``/``detected``/``reactive``, ``negative``/``neg``/``0``/``-``/
``not detected``/``non-reactive``), ``invalid`` and ``inconclusive`` readouts are skipped with a
note naming their lines, and a laboratory's own words can be added by the assay file's
``[results]`` table or the ``--result-word WORD=positive|negative|skip`` option.
"""
from __future__ import annotations

import re

import numpy as np

from .errors import InputError

POSITIVE, NEGATIVE, SKIP = 1, 0, -1
MEANINGS = {"positive": POSITIVE, "negative": NEGATIVE, "skip": SKIP}
DEFAULT_WORDS = {
    **dict.fromkeys(("positive", "pos", "1", "+", "detected", "reactive"), POSITIVE),
    **dict.fromkeys(("negative", "neg", "0", "-", "not detected", "non-reactive", "nonreactive"),
                    NEGATIVE),
    **dict.fromkeys(("invalid", "inconclusive"), SKIP),
}


def normalise(word) -> str:
    """A result word as matched: lower case, surrounding space removed, inner runs of space one."""
    return re.sub(r"\s+", " ", str(word).strip().lower())


def result_words(extra: dict | None = None, source: str | None = None) -> dict:
    """The word table: the usual words plus ``extra`` (word -> ``positive``/``negative``/``skip``,
    or lists of words under those three keys, as in the assay file's ``[results]`` table).
    A laboratory's own word overrides a usual one."""
    words = dict(DEFAULT_WORDS)
    for word, meaning in _pairs(extra or {}, source):
        words[normalise(word)] = meaning
    return words


def _pairs(extra: dict, source):
    for key, value in extra.items():
        if key in MEANINGS and isinstance(value, (list, tuple)):
            for word in value:
                if not isinstance(word, str) or not word.strip():
                    raise InputError(f"[results] {key} must be a list of words, got {word!r}",
                                     source)
                yield word, MEANINGS[key]
        elif isinstance(value, str) and normalise(value) in MEANINGS:
            if not str(key).strip():
                raise InputError("a result word may not be empty", source)
            yield key, MEANINGS[normalise(value)]
        else:
            raise InputError(f"result word {key!r}: expected positive, negative or skip (or a "
                             f"list of words under positive, negative, skip), got {value!r}",
                             source)


def parse_results(table, column: str = "result", words: dict | None = None) -> np.ndarray:
    """Result words of a table as 1 (positive), 0 (negative) or -1 (to be skipped); ``words`` are
    a laboratory's own words added to the usual ones (see :func:`result_words`)."""
    words = result_words(words)
    cells = table.frame[column]
    codes = cells.map(lambda w: words.get(normalise(w)))
    unknown = codes.isna().to_numpy()
    if unknown.any():
        r = int(np.flatnonzero(unknown)[0])
        raise table.error(f"result {cells.iat[r]!r} is not a known result word (positive/"
                          "negative, pos/neg, 1/0, +/-, detected/not detected, reactive/"
                          "non-reactive; invalid and inconclusive are skipped); map a "
                          "laboratory's own word with the assay file's [results] table or "
                          "`result_words` (WORD=positive)", r, column)
    return codes.to_numpy(dtype=np.int64)


def skipped_note(table, codes: np.ndarray, column: str = "result", shown: int = 10) -> str | None:
    """A note naming the readouts skipped, by word with their lines, or None when none were."""
    rows = np.flatnonzero(codes < 0)
    if not len(rows):
        return None
    words = table.frame[column].iloc[rows].map(normalise).to_numpy()
    unit = table.unit
    parts = []
    for word in dict.fromkeys(words):
        these = rows[words == word]
        lines = ", ".join(map(str, table.lines(these[:shown])))
        more = f" and {len(these) - shown} more" if len(these) > shown else ""
        parts.append(f"{len(these)} {word} readout(s) skipped ({unit}{'s' if len(these) > 1 else ''}"
                     f" {lines}{more})")
    return f"{table.path}: " + "; ".join(parts)
