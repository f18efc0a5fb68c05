"""The report's colour scale for probabilities: "estuary", pale sand through sea green to deep ink.

A sequential scale whose lightness (CIE L*) falls steadily from one end to the other, so that it
reads in the same order with any of the common colour-vision deficiencies and in grey print (the
tests check this through the sRGB and CIE L* formulas and simulated deficiencies). Probability is
placed on the scale by its log-odds, clipped at 1e-4 and 1 - 1e-4, so that 0.001 and 0.01, or 0.99
and 0.999, look different: those are the differences that decide a call. Text on a coloured cell is
black or white, whichever contrasts more (WCAG 2 contrast ratio).
"""
from __future__ import annotations

import math

import numpy as np

NAME = "estuary"
ANCHORS = ("#fcf5c8", "#cfe8a4", "#86cfa0", "#45aaa7", "#2f7ea6", "#33549a", "#352f78", "#22123f")
CLIP = 1e-4  # probabilities below CLIP (above 1 - CLIP) take the end colours
TICKS = (1e-4, 1e-3, 1e-2, 0.1, 0.5, 0.9, 0.99, 0.999, 0.9999)

_RGB = np.array([[int(a[i:i + 2], 16) for i in (1, 3, 5)] for a in ANCHORS], dtype=float)
_LIMIT = math.log((1 - CLIP) / CLIP)


def position(p) -> np.ndarray:
    """Where probability ``p`` sits on the scale, 0 (pale, p <= 1e-4) to 1 (dark, p >= 1 - 1e-4)."""
    p = np.clip(np.asarray(p, dtype=float), CLIP, 1 - CLIP)
    return (np.log(p) - np.log1p(-p) + _LIMIT) / (2 * _LIMIT)


def rgb_at(t) -> np.ndarray:
    """sRGB (0-255 floats, shape (..., 3)) at scale positions ``t`` in [0, 1]; linear between anchors."""
    t = np.clip(np.asarray(t, dtype=float), 0.0, 1.0)
    x = np.linspace(0.0, 1.0, len(ANCHORS))
    return np.stack([np.interp(t, x, _RGB[:, c]) for c in range(3)], axis=-1)


def hex_of(rgb) -> str:
    r, g, b = (int(round(float(v))) for v in rgb)
    return f"#{r:02x}{g:02x}{b:02x}"


def colour(p) -> str:
    """Background colour of probability ``p`` as ``#rrggbb``."""
    return hex_of(rgb_at(position(p)))


def relative_luminance(rgb) -> np.ndarray:
    """WCAG 2 relative luminance of sRGB colours given as 0-255 values (IEC 61966-2-1 transfer)."""
    c = np.asarray(rgb, dtype=float) / 255.0
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return lin @ np.array([0.2126, 0.7152, 0.0722])


def contrast(l1, l2) -> float:
    """WCAG 2 contrast ratio of two relative luminances."""
    hi, lo = max(l1, l2), min(l1, l2)
    return (hi + 0.05) / (lo + 0.05)


def ink(p) -> str:
    """Text colour (black or white) that contrasts more with the colour of ``p``."""
    y = float(relative_luminance(rgb_at(position(p))))
    return "#000000" if contrast(y, 0.0) >= contrast(y, 1.0) else "#ffffff"


def style(p) -> str:
    """``background`` and ``color`` declarations for a cell showing probability ``p``."""
    return f"background:{colour(p)};color:{ink(p)}"


def styles(probabilities) -> list:
    """:func:`style` of every probability of an array (vectorised: one pass for a whole run)."""
    rgb = rgb_at(position(probabilities)).reshape(-1, 3)
    y = relative_luminance(rgb)
    dark_text = (y + 0.05) / 0.05 >= 1.05 / (y + 0.05)   # contrast with black >= with white
    codes = np.rint(rgb).astype(np.int64)
    return [f"background:#{r:02x}{g:02x}{b:02x};color:{'#000000' if d else '#ffffff'}"
            for (r, g, b), d in zip(codes.tolist(), dark_text.tolist())]
