"""The HTML record of a simulated study: what was simulated, one figure per measure, the table.

Built from a :class:`bayespool.simulation.Sweep` only (no simulation here), on the same page frame as
the run report: one self-contained file, figures as inline SVG, the caution at the top and bottom.
"""
from __future__ import annotations

from datetime import datetime, timezone

from .escape import text
from .markup import el, facts, frame_table, section

STUDY_TITLE = "bayespool simulated study"
TABLE_COLUMNS = ("scheme", "prevalence", "assay", "pool_size", "rows", "cols", "tests",
                 "negative_below", "positive_above")


def build_study_report(study, title: str | None = None, *, created=None, audit=None) -> str:
    """The study's report as an HTML string; ``audit`` (a :class:`bayespool.audit.Audit`) is the
    command's record (command line, inputs' SHA-256), made here when not given."""
    from .. import __version__
    from ..simulation.plots import MEASURES, measure_figure
    from ..audit import make_audit
    from .audit import audit_section
    from .page import page
    from .svg import to_svg
    table = study.table
    first = study.results[0]
    c = first.characteristics
    schemes = list(dict.fromkeys(table["scheme"]))
    assays = list(dict.fromkeys(s.assay.describe() for s in study.results))
    about = facts([
        ("Schemes", text(", ".join(schemes))),
        ("Cells", text(f"{len(study.results)} (scheme x setting), {c.runs} simulated cohorts of "
                       f"{c.specimens} specimens each")),
        ("Assay" + ("s" if len(assays) > 1 else ""), text("; ".join(assays))),
        ("Seed", text("none (not reproducible)" if first.seed is None else str(first.seed))),
        ("What this is", text("Cohorts and readouts are drawn from the assay model, so these "
                              "figures describe the model given, not a laboratory. Cells at one "
                              "prevalence share their simulated cohorts.")),
    ])
    sections = [section("study", "Study", about)]
    toc = [("study", "Study")]
    for measure, label in MEASURES.items():
        fig = measure_figure(table, measure, name=f"study-{measure.replace('_', '-')}")
        svg = to_svg(fig, f"study-{measure.replace('_', '-')}", f"{label} against prevalence")
        sid = f"plot-{measure.replace('_', '-')}"
        sections.append(section(sid, label.capitalize(), el("figure", svg)))
        toc.append((sid, label.capitalize()))
    keys = [k for k in TABLE_COLUMNS if k in table.columns and table[k].notna().any()]
    shown = table[keys + [k for k in table.columns if k not in keys]]
    sections.append(section("table", "Table", frame_table(
        shown, caption="Estimates with Monte Carlo standard errors (_se); expected_: closed form "
        "where one exists (Kim et al. 2007 for Dorfman)")))
    toc.append(("table", "Table"))
    if created is None:
        created = datetime.now(timezone.utc)
    if audit is None:
        audit = make_audit({}, created=created, seed=first.seed)
    sections.append(audit_section(audit))
    toc.append(("audit", "Audit trail"))
    when = created.strftime("%Y-%m-%d %H:%M UTC") if isinstance(created, datetime) else str(created)
    meta = [f"Written {when} by bayespool {__version__}"]
    footer = f"bayespool {__version__}. This file is self-contained and loads nothing."
    return page(title or STUDY_TITLE, meta, toc, sections, footer)


def write_study_report(path, study, title: str | None = None, **options):
    """Write the study's report to ``path`` atomically."""
    from ..io import check_output_path, write_text
    target = check_output_path(path)
    write_text(build_study_report(study, title, **options), target)
    return target
