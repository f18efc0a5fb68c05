"""Matplotlib figures as inline SVG: no files, no network, no global pyplot state.

Figures are made with :class:`matplotlib.figure.Figure` on an Agg canvas (never pyplot, so a report
changes nothing in the caller's matplotlib session) and saved as SVG text without its XML prolog,
ready to sit inside the HTML. Text stays text (``svg.fonttype = none``) so it can be read, searched
and copied. Every element ID is prefixed with the figure's own name, so several figures on one page
never share an ID; matplotlib's page-wide ``<style>`` is dropped (the report's CSS carries the rule,
scoped to figures); no date is written, so the same inputs give the same page.
"""
from __future__ import annotations

import contextlib
import io
import re

STYLE = {"svg.fonttype": "none", "font.family": "sans-serif", "font.sans-serif": ["DejaVu Sans"],
         "font.size": 9.5,
         "axes.spines.top": False, "axes.spines.right": False, "axes.titlesize": 10,
         "axes.titleweight": "bold", "axes.grid": True, "grid.color": "#dddddd",
         "grid.linewidth": 0.6, "axes.axisbelow": True}


@contextlib.contextmanager
def drawing(name: str, width: float = 6.4, height: float = 3.4):
    """Yield a new Figure (inches) on an Agg canvas, drawn with the report's style."""
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    with matplotlib.rc_context({**STYLE, "svg.hashsalt": f"bayespool-{name}"}):
        fig = Figure(figsize=(width, height), layout="constrained")
        FigureCanvasAgg(fig)
        yield fig


def to_svg(fig, name: str, label: str) -> str:
    """The figure as an ``<svg>`` element with ``role="img"`` and the accessible name ``label``."""
    import matplotlib
    from .escape import attr
    with matplotlib.rc_context({**STYLE, "svg.hashsalt": f"bayespool-{name}"}):
        buf = io.StringIO()
        fig.savefig(buf, format="svg", metadata={"Date": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]
    svg = re.sub(r"<metadata>.*?</metadata>\s*", "", svg, count=1, flags=re.S)
    svg = re.sub(r"<style[^>]*>.*?</style>\s*", "", svg, flags=re.S)
    svg = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{name}-{m.group(1)}"', svg)
    svg = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{name}-{m.group(1)})", svg)
    svg = re.sub(r'href="#([^"]+)"', lambda m: f'href="#{name}-{m.group(1)}"', svg)
    return svg.replace("<svg ", f'<svg role="img" aria-label="{attr(label)}" ', 1)
