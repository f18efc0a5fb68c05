"""Prevalence by group: the estimates table, a chart of estimates with intervals by group (over
time when a grouping column holds dates or weeks), and the two-group difference.

The result is read through ``to_frame()``, ``summary()``, ``by``, ``per``, ``level``,
``interval``, ``assay``, ``difference`` and ``notes`` only.
"""
from __future__ import annotations

import re

import numpy as np
import pandas as pd

from .escape import text
from .markup import el, facts, frame_table, section
from .svg import drawing, to_svg

_WEEK = re.compile(r"^\s*(\d{4})-?W(\d{1,2})\s*$", re.I)


def as_time(values: pd.Series) -> pd.Series | None:
    """Dates or ISO weeks (``2024-W05``, as the Monday of the week) as timestamps, else None."""
    text_values = values.astype(str)
    weeks = text_values.str.extract(_WEEK)
    if weeks.notna().all().all():
        return pd.Series([pd.Timestamp.fromisocalendar(int(y), int(w), 1)
                          for y, w in weeks.itertuples(index=False)], index=values.index)
    if text_values.str.fullmatch(r"\d{4}-\d{2}-\d{2}").all():
        parsed = pd.to_datetime(text_values, format="%Y-%m-%d", errors="coerce")
        if parsed.notna().all():
            return parsed
    return None


def _chart(result, frame: pd.DataFrame) -> str:
    by = list(result.by)
    per = result.per
    unit = "prevalence" if per == 1 else f"per {per:g} specimens"
    time_col = next((c for c in by if as_time(frame[c]) is not None), None)
    label = (f"Prevalence estimates with {result.level:.0%} {result.interval} intervals"
             + (f" over {time_col}" if time_col else " by group"))
    with drawing("prevalence", 6.6, 3.2 if time_col else max(1.6, 0.34 * len(frame) + 1.0)) as fig:
        ax = fig.add_subplot()
        if time_col:
            when = as_time(frame[time_col])
            rest = [c for c in by if c != time_col]
            keys = frame[rest].astype(str).agg(" / ".join, axis=1) if rest else \
                pd.Series(["all"] * len(frame), index=frame.index)
            for i, key in enumerate(dict.fromkeys(keys)):
                sel = (keys == key).to_numpy()
                order = np.argsort(when[sel].to_numpy())
                t = when[sel].to_numpy()[order]
                est = frame["mle"].to_numpy()[sel][order]
                lo = frame["lower"].to_numpy()[sel][order]
                up = frame["upper"].to_numpy()[sel][order]
                line, = ax.plot(t, est, marker="o", ms=3.5, lw=1.2, label=key if rest else None)
                ax.fill_between(t, lo, up, color=line.get_color(), alpha=0.18, lw=0)
            if rest:
                ax.legend(fontsize=8, frameon=False)
            ticks = pd.DataFrame({"t": when, "label": frame[time_col].astype(str)}) \
                .drop_duplicates("t").sort_values("t")
            step = max(1, len(ticks) // 8)
            ax.set_xticks(ticks["t"].to_numpy()[::step], ticks["label"].tolist()[::step])
            ax.set_xlabel(time_col)
        else:
            labels = (frame[by].astype(str).agg(" / ".join, axis=1) if by
                      else pd.Series(["all"], index=frame.index)).tolist()
            y = np.arange(len(frame))[::-1]
            est = frame["mle"].to_numpy()
            ax.errorbar(est, y, xerr=[est - frame["lower"].to_numpy(),
                                      frame["upper"].to_numpy() - est],
                        fmt="o", ms=4, capsize=3, lw=1.2, color="#1f5f8b")
            ax.set_yticks(y, labels)
            ax.set_xlabel(unit)
            ax.grid(axis="y", visible=False)
        if time_col:
            ax.set_ylabel(unit)
        ax.set_title(label)
        return to_svg(fig, "prevalence", label)


def prevalence_section(result) -> str:
    frame = result.to_frame().reset_index()
    chart = _chart(result, frame)
    lead = (f"Estimates per {result.per:g} specimen{'s' if result.per != 1 else ''}: maximum "
            "likelihood (MLE), bias-corrected (Firth), the "
            f"{result.level:.0%} {text(result.interval)} interval, and the minimum infection "
            "rate (positive pools per specimen) for comparison. Estimates describe these data "
            "and the assay model given.")
    items = [("Assay", text(result.assay)), ("Groups", text(str(len(frame))))]
    if result.difference is not None:
        items.append(("Difference", text(str(result.difference))))
    for n in result.notes:
        items.append(("Note", text(n)))
    shown = frame.drop(columns=[c for c in ("interval", "level", "per") if c in frame.columns])
    if not shown["note"].astype(bool).any():
        shown = shown.drop(columns="note")
    table = frame_table(shown, caption="Prevalence by group")
    return section("prevalence", "Prevalence", facts(items) + el("figure", chart) + table, lead)
