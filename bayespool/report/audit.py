"""The audit trail and the review block: what produced this report, and room to sign it.

The trail (:class:`bayespool.audit.Audit`) lists the command line, bayespool's version, the seed,
the date and every input file's name, size and SHA-256, so a filed copy can be traced to its exact
inputs. The review block prints as empty lines for "reviewed by", date and signature, for the
paper or PDF copy (the page's print stylesheet keeps them on the last page).
"""
from __future__ import annotations

import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, facts, frame_table, section


def audit_section(audit) -> str:
    if audit is None:
        return ""
    seed = ("not given (the result used no random numbers or is not meant to be repeated "
            "draw for draw)" if audit.seed is None else str(audit.seed))
    items = [("Command", el("code", text(audit.command)) if audit.command else
              text("built through the Python library (no command line)")),
             ("bayespool version", text(audit.version)),
             ("Seed", text(seed)),
             ("Date", text(audit.created.strftime("%Y-%m-%d %H:%M:%S UTC")
                           if hasattr(audit.created, "strftime") else audit.date))]
    body = facts(items)
    if audit.inputs:
        frame = pd.DataFrame([{"role": f["role"], "file": f["name"], "size_bytes": f["size"],
                               "sha256": f["sha256"]} for f in audit.inputs])
        body += el("h3", "Input files") + el("div", frame_table(
            frame, class_="data inputs", formats={"size_bytes": lambda v: fmt.number(int(v))}),
            class_="scroll")
        body += el("p", "Check a file against this record with any SHA-256 tool (for example "
                   "sha256sum): the same digest means the same bytes.", class_="muted")
    return section("audit", "Audit trail", body,
                   "What produced this report, so a filed copy can be traced to its inputs.")


def review_block() -> str:
    """Fields to fill in by hand on the printed copy."""
    fields = "".join(el("div", el("span", name, class_="label") + el("span", "", class_="line"),
                        class_="field") for name in ("Reviewed by", "Date", "Signature"))
    return el("section", el("h2", "Review") + el(
        "p", "To be completed by the responsible professional on the filed copy.",
        class_="muted") + el("div", fields, class_="fields"), id="review", class_="review")
