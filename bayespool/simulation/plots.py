"""Figures of a study: one per measure against prevalence, one line per scheme (and setting).

Each figure is a matplotlib ``Figure`` on an Agg canvas (never pyplot; the report's drawing style),
with error bars of two Monte Carlo standard errors. :func:`write_plots` writes each as PNG and SVG;
the study report embeds the SVG text.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

MEASURES = {"tests_per_sample": "tests per specimen", "sensitivity": "sensitivity",
            "specificity": "specificity"}
SERIES_KEYS = ("scheme", "pool_size", "assay", "negative_below", "positive_above", "rows", "cols",
               "tests")


def series(table: pd.DataFrame):
    """(label, rows sorted by prevalence) for each line: the cells that differ only in prevalence."""
    keys = [k for k in SERIES_KEYS if k in table.columns and table[k].notna().any()
            and (k == "scheme" or table[k].nunique(dropna=True) > 1)]
    frame = table.assign(_order=np.arange(len(table)))
    labelled = frame[keys].astype(object).where(frame[keys].notna(), "")
    out = []
    for _, idx in labelled.groupby(keys, sort=False).groups.items():
        rows = frame.loc[idx].sort_values("prevalence")
        first = labelled.loc[idx[0]]
        label = ", ".join(str(first[k]) if k == "scheme" else f"{k.replace('_', ' ')} {first[k]}"
                          for k in keys if first[k] != "")
        out.append((label, rows))
    return out


def measure_figure(table: pd.DataFrame, measure: str, name: str | None = None):
    """The figure of ``measure`` against prevalence (log axis when prevalences span a decade)."""
    from ..report.svg import drawing
    label = MEASURES[measure]
    with drawing(name or f"study-{measure}", 6.4, 3.6) as fig:
        ax = fig.add_subplot()
        for line, rows in series(table):
            x = rows["prevalence"].to_numpy(dtype=float)
            y = rows[measure].to_numpy(dtype=float)
            se = rows[f"{measure}_se"].to_numpy(dtype=float)
            ax.errorbar(x, y, yerr=2 * np.nan_to_num(se), marker="o", markersize=3.5,
                        capsize=2.5, linewidth=1.4, label=line)
        prev = table["prevalence"].dropna().to_numpy(dtype=float)
        if len(prev) and prev.max() / prev.min() >= 10:
            ax.set_xscale("log")
        ax.set_xlabel("prevalence")
        ax.set_ylabel(label)
        ax.set_title(f"{label} against prevalence (bars: ±2 Monte Carlo standard errors)")
        ax.legend(fontsize=8, frameon=False)
    return fig


def write_plots(table: pd.DataFrame, folder) -> list[Path]:
    """``<measure>.png`` and ``<measure>.svg`` in ``folder`` for each measure, written atomically."""
    from ..io import atomic_output
    folder = Path(folder)
    written = []
    for measure in MEASURES:
        fig = measure_figure(table, measure)
        for kind in ("png", "svg"):
            path = folder / f"{measure}.{kind}"
            with atomic_output(path, "wb") as fh:
                fig.savefig(fh, format=kind, dpi=150, metadata={"Date": None} if kind == "svg"
                            else None)
            written.append(path)
    return written
