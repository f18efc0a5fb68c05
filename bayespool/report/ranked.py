"""The ranked chart, drawn when specimens have no plate positions: the most probable specimens as
bars, each labelled with its ID and its probability, with the two call thresholds marked.

Hand-written SVG rather than matplotlib so that IDs are escaped by the report's own rule and the bars
share the colour scale of the rest of the page.
"""
from __future__ import annotations

import numpy as np

from . import formatting as fmt
from .escape import attr, text
from .palette import colour

MAX_BARS = 60   # positives and inconclusives first, then the next most probable, up to this many
MIN_BARS = 20
LABEL_CHARS = 28


def chosen(probability, calls) -> np.ndarray:
    """Indices to draw, most probable first: every non-negative call up to MAX_BARS, at least MIN_BARS."""
    order = np.argsort(-np.asarray(probability, dtype=float), kind="stable")
    undecided = int(np.sum(np.asarray(calls, dtype=object) != "negative"))
    n = min(len(order), max(MIN_BARS, min(undecided, MAX_BARS)))
    return order[:n]


def ranked_chart(sample_ids, probability, calls, negative_below: float, positive_above: float) -> str:
    """SVG bar chart of the top specimens by probability, plus a line on the rest."""
    idx = chosen(probability, calls)
    row, left, bar_w, right, top = 18, 210, 420, 120, 26
    height = top + row * len(idx) + 10
    width = left + bar_w + right
    out = [f'<svg class="ranked" role="img" aria-label="Specimens ranked by probability" '
           f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" '
           f'xmlns="http://www.w3.org/2000/svg">']
    for p, name in ((negative_below, "negative below"), (positive_above, "positive above")):
        x = left + bar_w * p
        out.append(f'<line x1="{x:.1f}" y1="{top - 6}" x2="{x:.1f}" y2="{height - 6}" '
                   'class="threshold"/>')
        anchor = "start" if p < 0.5 else "end"
        dx = 3 if p < 0.5 else -3
        out.append(f'<text x="{x + dx:.1f}" y="{top - 10}" text-anchor="{anchor}" class="axis">'
                   f'{text(name)} {text(fmt.prob_short(p))}</text>')
    for j, i in enumerate(idx):
        y = top + j * row
        p = float(probability[i])
        sid = str(sample_ids[i])
        short = sid if len(sid) <= LABEL_CHARS else sid[:LABEL_CHARS - 1] + "\u2026"
        w = max(bar_w * p, 1.0)
        out.append(f'<g class="bar call-{attr(calls[i])}" data-sample="{attr(sid)}">'
                   f'<title>{text(sid)}: {text(fmt.prob_long(p))} ({text(calls[i])})</title>'
                   f'<text x="{left - 6}" y="{y + 13}" text-anchor="end" class="id">{text(short)}</text>'
                   f'<rect x="{left}" y="{y + 2}" width="{bar_w}" height="{row - 4}" class="track"/>'
                   f'<rect x="{left}" y="{y + 2}" width="{w:.1f}" height="{row - 4}" '
                   f'fill="{colour(p)}" stroke="#555" stroke-width="0.4"/>'
                   f'<text x="{left + bar_w + 6}" y="{y + 13}" class="val">{text(fmt.prob_long(p))} '
                   f'{text(calls[i])}</text></g>')
    out.append("</svg>")
    rest = len(probability) - len(idx)
    note = ""
    if rest > 0:
        below = float(np.asarray(probability, dtype=float)[np.argsort(-np.asarray(probability))[len(idx)]])
        note = (f'<p class="muted">The other {rest} specimen(s) have probability '
                f'{text(fmt.prob_long(below))} or less; all are in the calls table.</p>')
    return "".join(out) + note
