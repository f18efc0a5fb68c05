"""The page around the sections: head with its Content-Security-Policy, caution banner, contents,
footer. One self-contained file: styles and the script inline, figures as inline SVG, nothing loaded.

The policy forbids every fetch (``default-src 'none'``) and lets only the report's own script run,
named by its SHA-256 hash, so that even a string that slipped past escaping could not execute.
"""
from __future__ import annotations

import base64
import hashlib

from .escape import text
from .script import JS
from .style import CSS

CAUTION = ("<b>Statistical decision support, not a diagnostic device.</b> The probabilities and "
           "calls in this report come from a statistical model of pooled testing. Confirm every "
           "result by the laboratory's validated procedure and local regulations, under the "
           "responsible licensed professional, before any result is reported or acted on.")


def script_hash(js: str = JS) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(js.encode("utf-8")).digest()).decode("ascii")


def policy(js: str = JS) -> str:
    return (f"default-src 'none'; script-src '{script_hash(js)}'; style-src 'unsafe-inline'; "
            "img-src data:; base-uri 'none'; form-action 'none'")


def caution() -> str:
    return ('<div class="caution" id="caution" role="note"><span class="sign" aria-hidden="true">'
            f'\u26a0</span><p>{CAUTION}</p></div>')


def page(title: str, meta: list[str], toc: list[tuple[str, str]], sections: list[str],
         footer: str) -> str:
    """The whole document; ``title`` and ``meta`` items are plain text, the rest markup."""
    nav = " ".join(f'<a href="#{sid}">{name}</a>' for sid, name in toc)
    meta_html = "".join(f'<p class="meta">{text(m)}</p>' for m in meta)
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f'<meta http-equiv="Content-Security-Policy" content="{policy()}">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        '<meta name="referrer" content="no-referrer">\n'
        f"<title>{text(title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n"
        f'<header class="top"><h1 id="title">{text(title)}</h1>{meta_html}{caution()}'
        f'<nav class="toc" aria-label="Sections">{nav}</nav></header>\n'
        f"<main>\n{''.join(sections)}\n</main>\n"
        f'<footer id="footer"><p>{CAUTION}</p><p>{footer}</p></footer>\n'
        f"<script>{JS}</script>\n</body>\n</html>\n"
    )
