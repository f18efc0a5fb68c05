"""The legend of the probability colour scale: a gradient bar with probability ticks, the call
thresholds, and the marks that say the call without colour."""
from __future__ import annotations

import numpy as np

from . import formatting as fmt
from .escape import text
from .palette import NAME, TICKS, hex_of, position, rgb_at


def legend(negative_below: float, positive_above: float, marks: bool = True) -> str:
    """SVG legend of scale 'estuary' (log-odds placement), with a caption in words."""
    width, x0, bar, h = 640, 20, 600, 18
    stops = "".join(f'<stop offset="{t:.3f}" stop-color="{hex_of(rgb_at(t))}"/>'
                    for t in np.linspace(0, 1, 29))
    out = [f'<svg class="legend-bar" role="img" aria-label="Colour scale {NAME}: pale for '
           f'probabilities near 0, dark for near 1" viewBox="0 0 {width} 64" width="{width}" '
           f'height="64" xmlns="http://www.w3.org/2000/svg">',
           f'<defs><linearGradient id="scale-{NAME}" x1="0" x2="1" y1="0" y2="0">{stops}'
           '</linearGradient></defs>',
           f'<rect x="{x0}" y="6" width="{bar}" height="{h}" fill="url(#scale-{NAME})" '
           'stroke="#444" stroke-width="0.6"/>']
    for p in TICKS:
        x = x0 + bar * float(position(p))
        out.append(f'<line x1="{x:.1f}" y1="{6 + h}" x2="{x:.1f}" y2="{10 + h}" stroke="#333"/>'
                   f'<text x="{x:.1f}" y="{22 + h}" text-anchor="middle" class="axis">{p:g}</text>')
    for p, name in ((negative_below, "negative below"), (positive_above, "positive above")):
        x = x0 + bar * float(position(p))
        out.append(f'<line x1="{x:.1f}" y1="2" x2="{x:.1f}" y2="{8 + h}" class="threshold"/>'
                   f'<text x="{x:.1f}" y="{36 + h}" text-anchor="middle" class="axis thr">'
                   f'{text(name)} {text(fmt.prob_short(p))}</text>')
    out.append("</svg>")
    words = (f'<p class="legend-words">Colour scale <b>{NAME}</b>: pale for a probability of '
             'being positive near 0, dark for near 1, placed by log-odds so that 0.001, 0.01 and '
             '0.1 look different; it keeps its order for common colour-vision deficiencies and in '
             'grey print. The probability is printed as well as coloured.')
    if marks:
        words += (' Marks: <span class="mark">+</span> called positive, <span class="mark">?</span> '
                  'inconclusive, no mark negative; a hatched well holds no specimen.')
    return f'<div class="legend">{"".join(out)}{words}</p></div>'
