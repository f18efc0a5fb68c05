"""Controls and plate QC: a plate whose control fails does not vouch for its readouts.

Controls are wells of kind ``positive`` (must amplify, and within ``ct_min``..``ct_max`` when a Ct
is read and the range given), ``negative`` (a no-template control: must not amplify) or
``extraction`` (a blank carried through extraction: must not amplify). They come from a controls
file (``plate,well,kind`` with optional ``id``, ``ct_min``, ``ct_max``) or from the samples file's
``control`` column (a row whose ``control`` names a kind is a control, not a specimen; its
``sample`` is the control's ID). Common practice in qPCR: every run carries a no-template control
and a positive control, and a run whose controls fail is repeated.

A control's readouts are the rows of the readouts file whose ``pool`` is the control's ID, or whose
``plate`` and ``well`` columns name its well. A control that fails, or that has no readout,
invalidates its plate:

- the readouts read on that plate (rows whose ``plate`` column names it), and
- when the plate is one the specimens sit on (the samples file's ``plate``), every readout of a pool
  holding one of its specimens (an extraction control vouches for the extraction plate).

Those readouts are left out of the decode, so their specimens lose that evidence (those with no
other readout become untested and the planner retests them), and the result says which plate
failed and why.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .errors import InputError
from .result_protocol import Result
from .io import Table, read_id_table, read_table
from .results import parse_results
from .wells import check_wells, parse_well

KINDS = ("positive", "negative", "extraction")
MUST_AMPLIFY = {"positive": True, "negative": False, "extraction": False}


class RowSubset(Table):
    """Some rows of a table; errors and line numbers still point at the original file."""

    def __init__(self, base: Table, rows: np.ndarray):
        rows = np.asarray(rows, dtype=np.int64)
        super().__init__(base.frame.iloc[rows].reset_index(drop=True), base.path, base.header,
                         getattr(base, "delimiter", ","))
        self.base, self.rows = base, rows

    def line_of(self, row: int) -> int:
        return self.base.line_of(int(self.rows[int(row)]))

    def error(self, message: str, row: int | None = None, column: str | None = None):
        return self.base.error(message, None if row is None else int(self.rows[int(row)]), column)


@dataclass(repr=False)
class ControlCheck(Result):
    """What the controls said: one row per control (``controls``), one per plate (``plates``),
    and the readouts left out (``dropped_pools``: pool ID -> readouts dropped)."""

    controls: pd.DataFrame
    plates: pd.DataFrame
    dropped_pools: dict = field(default_factory=dict)
    messages: list = field(default_factory=list)

    @property
    def failed_plates(self) -> list:
        return self.plates.loc[self.plates["status"] == "failed", "plate"].tolist()

    def to_frame(self) -> pd.DataFrame:
        return self.plates.set_index("plate")

    def summary(self) -> dict:
        return {"plates": self.plates.to_dict("records"),
                "controls": self.controls.astype(object).where(self.controls.notna(), None)
                .to_dict("records"),
                "failed_plates": self.failed_plates,
                "readouts_left_out": int(sum(self.dropped_pools.values())),
                "pools_left_out": sorted(self.dropped_pools), "messages": list(self.messages)}

    def __str__(self) -> str:
        out = [f"plate {r.plate}: controls {r.status} ({r.detail})"
               for r in self.plates.itertuples()]
        return "\n".join(out + self.messages)

    def _brief(self) -> str:
        return (f"plates={len(self.plates)}, failed={len(self.failed_plates)}, "
                f"readouts_left_out={sum(self.dropped_pools.values())}")


def _kinds(table: Table, column: str, rows) -> np.ndarray:
    kind = table.frame[column].astype(str).str.strip().str.lower().to_numpy(dtype=object)
    for r in rows:
        if kind[r] not in KINDS:
            raise table.error(f"control kind {table.frame[column].iat[r]!r} must be one of "
                              f"{', '.join(KINDS)}", r, column)
    return kind


def _ct_range(table: Table, rows) -> tuple[np.ndarray, np.ndarray]:
    n = len(rows)
    lo, hi = np.full(n, np.nan), np.full(n, np.nan)
    for col, out in (("ct_min", lo), ("ct_max", hi)):
        if col in table.frame.columns:
            vals, given = table.numbers(col)
            bad = given & ~np.isfinite(vals)
            if bad[rows].any():
                r = int(np.asarray(rows)[bad[rows]][0])
                raise table.error(f"{col} must be a number of cycles", r, col)
            out[:] = vals[rows]
    return lo, hi


def read_controls(path) -> pd.DataFrame:
    """The controls file: ``plate,well,kind`` and optional ``id``, ``ct_min``, ``ct_max``."""
    table = read_table(path, ["plate", "well", "kind"], "controls")
    check_wells(table)
    f = table.frame
    rows = np.arange(len(f))
    blank = np.flatnonzero((f["well"].astype(str).str.strip() == "").to_numpy())
    if len(blank):
        raise table.error("a control needs its well", int(blank[0]), "well")
    lo, hi = _ct_range(table, rows)
    ids = (f["id"].astype(str).str.strip() if "id" in f.columns
           else pd.Series([""] * len(f)))
    return pd.DataFrame({"id": ids.to_numpy(dtype=object),
                         "plate": f["plate"].astype(str).str.strip().to_numpy(dtype=object),
                         "well": f["well"].astype(str).str.strip().to_numpy(dtype=object),
                         "kind": _kinds(table, "kind", rows), "ct_min": lo, "ct_max": hi})


def split_samples(sm: Table) -> tuple[Table, pd.DataFrame]:
    """Specimen rows of a samples table, and its control rows (``control`` column) as controls."""
    if "control" not in sm.frame.columns:
        return sm, _empty()
    mark = sm.frame["control"].astype(str).str.strip().to_numpy(dtype=object)
    is_control = mark != ""
    rows = np.flatnonzero(is_control)
    if not len(rows):
        return sm, _empty()
    kind = _kinds(sm, "control", rows)
    lo, hi = _ct_range(sm, rows)
    f = sm.frame
    ctl = pd.DataFrame({
        "id": f["sample"].iloc[rows].astype(str).str.strip().to_numpy(dtype=object),
        "plate": (f["plate"].iloc[rows].astype(str).str.strip().to_numpy(dtype=object)
                  if "plate" in f.columns else np.full(len(rows), "", dtype=object)),
        "well": (f["well"].iloc[rows].astype(str).str.strip().to_numpy(dtype=object)
                 if "well" in f.columns else np.full(len(rows), "", dtype=object)),
        "kind": kind[rows], "ct_min": lo, "ct_max": hi})
    return RowSubset(sm, np.flatnonzero(~is_control)), ctl


def _empty() -> pd.DataFrame:
    return pd.DataFrame({"id": [], "plate": [], "well": [], "kind": [], "ct_min": [],
                         "ct_max": []})


def _control_rows(rd: Table, ctl: pd.DataFrame) -> np.ndarray:
    """For each readout row, the index of the control it reads, or -1."""
    f = rd.frame
    which = np.full(len(f), -1, dtype=np.int64)
    by_id = {c: i for i, c in enumerate(ctl["id"]) if c}
    if by_id:
        which = f["pool"].astype(str).map(by_id).fillna(-1).to_numpy(dtype=np.int64)
    if "plate" in f.columns and "well" in f.columns:
        by_well = {}
        for i, (p, w) in enumerate(zip(ctl["plate"], ctl["well"])):
            pos = parse_well(w)
            if pos is not None:
                by_well[(p, pos)] = i
        plates = f["plate"].astype(str).str.strip().tolist()
        for r, w in enumerate(f["well"].astype(str).tolist()):
            if which[r] < 0:
                i = by_well.get((plates[r], parse_well(w)))
                if i is not None:
                    which[r] = i
    return which


def _verdicts(rd: Table, ctl: pd.DataFrame, which: np.ndarray, words) -> pd.DataFrame:
    rows = np.flatnonzero(which >= 0)
    res = parse_results(RowSubset(rd, rows), words=words) if len(rows) else np.zeros(0, int)
    ct = np.full(len(rows), np.nan)
    if "ct" in rd.frame.columns and len(rows):
        vals, given = RowSubset(rd, rows).numbers("ct")
        ct = np.where(given, vals, np.nan)
    out = []
    for i, c in enumerate(ctl.itertuples()):
        mine = which[rows] == i
        r, cts = res[mine], ct[mine]
        r_ok = r >= 0
        r, cts = r[r_ok], cts[r_ok]
        name = c.id or f"{c.plate} {c.well}".strip()
        where = f"{c.kind} control {name}" + (f" ({c.well})" if c.id and c.well else "")
        if not len(r):
            status, why = "failed", f"{where} has no readout"
        elif MUST_AMPLIFY[c.kind]:
            bad_ct = [v for v in cts if np.isfinite(v) and
                      ((np.isfinite(c.ct_min) and v < c.ct_min) or
                       (np.isfinite(c.ct_max) and v > c.ct_max))]
            if (r == 0).any():
                status, why = "failed", f"{where} did not amplify"
            elif bad_ct:
                status, why = "failed", (f"{where} read Ct {bad_ct[0]:g}, outside "
                                         f"{c.ct_min:g} to {c.ct_max:g}")
            else:
                status, why = "passed", f"{where} amplified"
        else:
            if (r == 1).any():
                status, why = "failed", f"{where} amplified"
            else:
                status, why = "passed", f"{where} stayed negative"
        out.append({"control": name, "plate": c.plate, "well": c.well, "kind": c.kind,
                    "readouts": int(len(r)), "ct": float(cts[0]) if len(cts) else np.nan,
                    "status": status, "reason": why})
    return pd.DataFrame(out, columns=["control", "plate", "well", "kind", "readouts", "ct",
                                      "status", "reason"])


def check_controls(lay: Table, rd: Table, sm: Table | None, ctl: pd.DataFrame, *,
                   words=None) -> tuple[Table, ControlCheck]:
    """The readouts to decode (controls and invalidated readouts removed) and the verdicts."""
    named = set(ctl["id"]) - {""}
    clash = named & set(lay.frame["pool"])
    if clash:
        raise InputError(f"control {sorted(clash)[0]!r} has the ID of a pool of the layout; "
                         "give controls IDs of their own")
    which = _control_rows(rd, ctl)
    verdict = _verdicts(rd, ctl, which, words)
    plates = []
    for plate, g in verdict.groupby("plate", sort=False):
        failed = g[g["status"] == "failed"]
        plates.append({"plate": plate, "controls": len(g),
                       "status": "failed" if len(failed) else "passed",
                       "detail": "; ".join(failed["reason"]) if len(failed)
                       else "; ".join(g["reason"])})
    plates = pd.DataFrame(plates, columns=["plate", "controls", "status", "detail"])
    bad = set(plates.loc[plates["status"] == "failed", "plate"])
    f = rd.frame
    drop = np.zeros(len(f), dtype=bool)
    if bad and "plate" in f.columns:
        drop |= f["plate"].astype(str).str.strip().isin(bad).to_numpy()
    if bad and sm is not None and "plate" in sm.frame.columns:
        on_bad = set(sm.frame.loc[sm.frame["plate"].astype(str).str.strip().isin(bad), "sample"])
        if on_bad:
            lf = lay.frame
            hit = set(lf.loc[lf["sample"].isin(on_bad), "pool"])
            drop |= f["pool"].isin(hit).to_numpy()
    drop &= which < 0
    dropped = f["pool"][drop].value_counts().to_dict()
    messages = []
    for r in plates[plates["status"] == "failed"].itertuples():
        messages.append(f"plate {r.plate} is invalid: {r.detail}; its readouts are left out "
                        "of the decode and their specimens need retesting")
    if bad:
        messages.append(f"{int(drop.sum())} readout(s) of {len(dropped)} pool(s) left out "
                        "because of failed controls")
    keep = np.flatnonzero((which < 0) & ~drop)
    return RowSubset(rd, keep), ControlCheck(verdict, plates, dropped, messages)


def read_run(layout, readouts=None, samples=None, controls=None, *, prevalence=None,
             result_words=None):
    """:meth:`bayespool.run.Run.read` with controls: returns ``(run, check)``; ``check`` is None
    when there are no controls (no controls file and no ``control`` column in the samples)."""
    from .defaults import PREVALENCE
    from .run import Run, input_sources
    prevalence = PREVALENCE if prevalence is None else prevalence
    sm = read_table(samples, ["sample"], "samples") if samples is not None else None
    ctl = _empty()
    if sm is not None:
        sm, ctl = split_samples(sm)
    if controls is not None:
        ctl = pd.concat([ctl, read_controls(controls)], ignore_index=True)
    if not len(ctl):
        run = Run.read(layout, readouts, samples, prevalence=prevalence, result_words=result_words)
        return run, None
    if readouts is None:
        raise InputError("controls are checked against readouts: give the readouts file")
    lay = read_id_table(layout, ("pool", "sample"), "layout")
    rd = read_table(readouts, ["pool", "result"], "readouts")
    kept, check = check_controls(lay, rd, sm, ctl, words=result_words)
    sources = {**input_sources(layout, readouts, samples),
               "controls": None if controls is None else str(controls)}
    run = Run.from_tables(lay, kept, sm, prevalence, words=result_words, sources=sources,
                          notes=check.messages)
    return run, check


def mark_specimens(posterior, run, check: ControlCheck) -> None:
    """Add a ``plate_qc`` column: which specimens lost readouts to a failed plate, and whether
    they are now untested (no readout left: their probability is the prior alone)."""
    if not check.dropped_pools:
        return
    lost_pools = np.flatnonzero(pd.Index(run.pool_ids).isin(list(check.dropped_pools)))
    lost = np.zeros(run.n_samples, dtype=bool)
    for t in lost_pools:
        lost[run.members(t)] = True
    read = np.repeat(run.pool_read, run.pool_size)
    untested = np.bincount(run.pool_members[read], minlength=run.n_samples) == 0
    note = np.where(lost & untested, "untested: readouts left out (failed controls)",
                    np.where(lost, "some readouts left out (failed controls)", ""))
    posterior.columns["plate_qc"] = note
    n = int((lost & untested).sum())
    if n:
        posterior.warnings.append(f"{n} specimen(s) have no readout left after the failed "
                                  "controls: their probability is the prior alone; retest them "
                                  "(bayespool plan does)")
