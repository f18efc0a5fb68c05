"""The run report: one self-contained HTML page a laboratory can read at the bench and file.

``write_report(path, run=..., assay=..., posterior=..., plan=..., calibration=...)`` renders
whatever it is given: the caution banner always; the run summary (from ``run``); the assay model and
its sensitivity curve (``assay``); the decoder, its convergence and diagnostics, the calls table, the
plate map or ranked chart, the ambiguity groups and the number of positives (``posterior``); the
planned next pools (``plan``, the :class:`~bayespool.planning.Plan`; :func:`build_report`, the
renderer, reads its table in the layout format plus the planner's columns); the calibration
(``calibration``, a fit result with ``summary()`` and a ``cells`` DataFrame).

The page loads nothing: CSS, the small sorting script and the figures (inline SVG, drawn with
matplotlib on the Agg canvas) are in the file, and its Content-Security-Policy forbids any fetch.
Every user-supplied string is escaped (:mod:`.escape`).
"""
from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

from .. import __version__

__all__ = ["build_report", "write_report"]

DEFAULT_TITLE = "bayespool run report"


def build_report(run=None, assay=None, posterior=None, plan=None, calibration=None, title=None, *,
                 created=None, notes=(), file_name=None, controls=None, worklist=None,
                 audit=None, prevalence=None) -> str:
    """The report as an HTML string. ``created`` (datetime or text) defaults to now, in UTC;
    ``notes`` are extra lines for the run summary (e.g. that the data is invented); ``controls``
    (a :class:`bayespool.controls.ControlCheck`) adds the control status per plate, ``worklist``
    (a :class:`bayespool.worklist.Worklist`) the destination plate map; ``audit`` (a
    :class:`bayespool.audit.Audit`) is the audit trail, made from the run's input files when not
    given; ``prevalence`` (a :class:`bayespool.surveillance.PrevalenceEstimates`) the estimates
    by group."""
    from .bench import controls_section, destinations_section
    from .calibration import calibration_section, observed_points
    from .calls import calls_section, map_section
    from .expectations import expectations_section
    from .groups import groups_section
    from .page import page
    from .planned import plan_section
    from .positives import positives_section
    from .audit import audit_section, review_block
    from .summary import assay_section, decoder_section, run_section
    from .why import why_section

    if all(x is None for x in (run, assay, posterior, plan, calibration, worklist, prevalence)):
        raise ValueError("nothing to report: give at least one of run, assay, posterior, plan, "
                         "calibration, worklist, prevalence")
    if run is not None and posterior is not None and posterior.n_samples != run.n_samples:
        raise ValueError(f"the posterior has {posterior.n_samples} specimens but the run has "
                         f"{run.n_samples}")
    sections, toc = [], []

    def add(sid, name, html):
        if html:
            sections.append(html)
            toc.append((sid, name))

    points, cells = observed_points(getattr(calibration, "cells", None)) \
        if calibration is not None else (None, None)
    if run is not None:
        add("summary", "Run", run_section(run, notes, fitted_prevalence(calibration)))
    if prevalence is not None:
        from .prevalence import prevalence_section
        add("prevalence", "Prevalence", prevalence_section(prevalence))
    add("controls", "Controls", controls_section(controls))
    if posterior is not None:
        add("decoder", "Decoder", decoder_section(posterior, run))
        add("expectations", "Expectations", expectations_section(posterior))
        mapped = map_section(posterior, run)
        add("plate-map" if 'id="plate-map"' in mapped else "ranked",
            "Plate map" if 'id="plate-map"' in mapped else "Ranked chart", mapped)
        add("calls", "Calls", calls_section(posterior, run))
        add("ambiguity", "Ambiguity", groups_section(posterior, run))
        add("why", "Why", why_section(posterior, run))
        add("positives", "Positives", positives_section(posterior))
    if plan is not None:
        add("plan", "Next pools", plan_section(plan, posterior))
    add("destinations", "Destination plates", destinations_section(worklist))
    if assay is not None:
        shown = set(calibration.summary()) if hasattr(calibration, "summary") else set()
        add("assay", "Assay", assay_section(assay, run, points, shown_elsewhere=shown))
    if calibration is not None:
        add("calibration", "Calibration", calibration_section(calibration, cells))

    if created is None:
        created = datetime.now(timezone.utc)
    if audit is None and run is not None:
        from ..audit import make_audit
        audit = make_audit(dict(run.sources or {}), created=created)
    add("audit", "Audit trail", audit_section(audit))
    sections.append(review_block())
    when = created.strftime("%Y-%m-%d %H:%M UTC") if isinstance(created, datetime) else str(created)
    meta = [f"Written {when} by bayespool {__version__}" +
            (f" as {file_name}" if file_name else "")]
    if posterior is not None:
        c = posterior.counts()
        meta.append(f"{posterior.n_samples} specimens: {c['positive']} positive, "
                    f"{c['inconclusive']} inconclusive, {c['negative']} negative "
                    f"(decoder: {posterior.method})")
    if prevalence is not None:
        meta.extend(notes if run is None else ())
    footer = f"bayespool {__version__}. This file is self-contained and loads nothing."
    return page(title or DEFAULT_TITLE, meta, toc, sections, footer)


def fitted_prevalence(calibration):
    """The prevalence a calibration from past runs fitted (estimate, lower, upper), or None."""
    if calibration is None or not hasattr(calibration, "summary"):
        return None
    prev = (calibration.summary().get("parameters") or {}).get("prevalence")
    return prev if isinstance(prev, dict) and prev.get("estimate") is not None else None


def write_report(path, *, run=None, assay=None, posterior=None, plan=None, calibration=None,
                 title=None, **options) -> Path:
    """Write the offline HTML report of results to ``path``, atomically.

    Parameters
    ----------
    path : str or os.PathLike
        The HTML file to write; one of the run's input files is refused.
    run : Run, optional
        The run (its summary, the plate map and the audit trail of its input files).
    assay : Assay, optional
        The assay model and its sensitivity curve.
    posterior : Posterior, optional
        The result of :func:`bayespool.decode`: calls, diagnostics, ambiguity, expectations.
    plan : Plan, optional
        The result of :func:`bayespool.plan`: the planned next pools.
    calibration : Calibration, optional
        The result of :func:`bayespool.calibrate`.
    title : str, optional
        The page title (default: "bayespool run report").
    **options
        ``notes`` (extra lines for the run summary), ``controls`` (ControlCheck), ``worklist``
        (Worklist), ``audit`` (Audit), ``prevalence`` (PrevalenceEstimates), ``created``.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    InputError
        ``plan`` is not a Plan, the path is an input or lies in no existing folder, or there is
        nothing to report.

    References
    ----------
    The page is one HTML5 document (WHATWG HTML Living Standard) with inline SVG and a
    Content-Security-Policy (W3C CSP Level 3) that forbids every fetch, so it opens offline.

    Examples
    --------
    >>> import bayespool, tempfile, pathlib
    >>> run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
    ...                          "datasets/demo/samples.csv")
    >>> assay = bayespool.read_assay("datasets/demo/assay.toml")
    >>> posterior = bayespool.decode(run, assay)
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> bayespool.write_report(folder / "run.html", run=run, assay=assay,
    ...                        posterior=posterior).name
    'run.html'
    """
    from ..errors import InputError
    from ..io import check_output_path, check_outputs, write_text
    from ..result_protocol import file_frame
    if plan is not None:
        from ..planning import Plan
        if not isinstance(plan, Plan):
            raise InputError(f"plan must be a Plan (the result of bayespool.plan), got "
                             f"{type(plan).__name__}", parameters=("plan",))
        plan = file_frame(plan.to_frame())
    inputs = dict(run.sources if run is not None else {})
    audit = options.get("audit")
    inputs.update({f["role"]: f["name"] for f in (audit.inputs if audit is not None else [])})
    check_outputs({"path": path}, inputs)
    target = check_output_path(path)
    html = build_report(run, assay, posterior, plan, calibration, title,
                        file_name=options.pop("file_name", target.name), **options)
    write_text(html, target)
    return target
