"""Escaping of every user-supplied string (specimen and pool IDs, file names, titles) for HTML.

Everything that reaches the page from outside goes through :func:`text`: markup characters and both
quote characters become entities, so a value is inert both as element text and inside a quoted
attribute. Control characters become U+FFFD, and bidirectional-override characters are shown as a
visible code, so that an ID cannot be made to display as a different ID.
"""
from __future__ import annotations

import html
import re

_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")
_BIDI = re.compile(r"[\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def text(value) -> str:
    """``value`` as HTML-safe text, usable as element content and as a quoted attribute value."""
    s = "" if value is None else str(value)
    if not (s.isascii() and s.isprintable()):  # the common case skips both substitutions
        s = _CONTROL.sub("\ufffd", s)
        s = _BIDI.sub(lambda m: f"[U+{ord(m.group()):04X}]", s)
    return html.escape(s, quote=True)


def attr(value) -> str:
    """Same as :func:`text`; named apart so that the call site says where the value goes."""
    return text(value)
