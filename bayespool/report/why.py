"""Why a specimen is where it is: its pools, what they read, and who else was in them.

For each specimen a folded entry (``<details id="why-N">``, N its 0-based input position) lists
every pool it is in with the pool's size, its readouts (and Ct values) and the other members with
their probabilities, so a reader can follow the evidence behind a call: a positive pool whose
other members are all cleared points at this specimen; one shared with a likely positive does
not. The calls table and the plate map link to these entries. Large runs list the specimens that
are not negative (and say so), keeping the page a size a browser opens.
"""
from __future__ import annotations

import numpy as np

from . import formatting as fmt
from .escape import text
from .markup import el, section

ALL_UP_TO = 3000      # runs with more specimens list only the non-negative ones
MEMBERS_SHOWN = 12    # other members listed per pool, most probable first


def why_id(i: int) -> str:
    return f"why-{int(i)}"


def _ct_by_pool(run) -> dict:
    ct = getattr(run, "readout_ct", None)
    out: dict = {}
    if ct is None or not len(ct):
        return out
    for t, value in zip(ct["pool"].to_numpy(), ct["ct"].to_numpy(float)):
        if np.isfinite(value):
            out.setdefault(int(t), []).append(f"{value:.1f}")
    return out


def _readouts(run, t: int) -> str:
    pos, neg = int(run.n_positive[t]), int(run.n_negative[t])
    if pos + neg == 0:
        return "not read"
    parts = []
    if pos:
        parts.append(f"{pos} positive")
    if neg:
        parts.append(f"{neg} negative")
    return ", ".join(parts)


def _others(run, t: int, i: int, ids, prob) -> str:
    members = [int(m) for m in run.members(t) if int(m) != i]
    if not members:
        return el("span", "none (tested alone)", class_="muted")
    members.sort(key=lambda m: -prob[m])
    shown = [el("a", text(str(ids[m])), href=f"#{why_id(m)}", class_="id") + " " +
             text(fmt.prob_short(prob[m])) for m in members[:MEMBERS_SHOWN]]
    rest = members[MEMBERS_SHOWN:]
    if rest:
        shown.append(text(f"and {len(rest)} more, each at most {fmt.prob_short(prob[rest[0]])}"))
    return ", ".join(shown)


def entry(i: int, run, posterior, calls, cts: dict) -> str:
    ids, prob = posterior.sample_ids, np.asarray(posterior.probability, dtype=float)
    pools = run.pools_of(i)
    head = (el("span", text(str(ids[i])), class_="id") + " " +
            text(f"\u2014 P(positive) {fmt.prob_long(prob[i])}, {calls[i]}; prior "
                 f"{fmt.prob_long(run.prior[i])}; in {len(pools)} pool(s)"))
    if not len(pools):
        body = el("p", "In no pool: the probability is the prior.", class_="muted")
    else:
        rows = []
        for t in pools.tolist():
            cells = (el("th", text(str(run.pool_ids[t])), scope="row") +
                     el("td", text(str(int(run.pool_size[t]))), class_="num") +
                     el("td", text(_readouts(run, t))) +
                     el("td", text(", ".join(cts.get(t, [])))) +
                     el("td", _others(run, t, i, ids, prob)))
            rows.append(el("tr", cells, class_="pos" if run.n_positive[t] else None))
        head_row = "".join(el("th", h, scope="col") for h in (
            "pool", "size", "readouts", "Ct", "other members and their probabilities"))
        body = el("table", el("thead", el("tr", head_row)) + el("tbody", "".join(rows)),
                  class_="data why-pools")
    return el("details", el("summary", head) + body, id=why_id(i), class_="why",
              data_call=str(calls[i]))


def why_section(posterior, run) -> str:
    """One folded entry per specimen (or per non-negative specimen in a large run)."""
    if run is None or run.n_samples == 0:
        return ""
    calls = posterior.calls()
    order = np.lexsort((np.arange(run.n_samples), -np.asarray(posterior.probability)))
    note = ""
    if run.n_samples > ALL_UP_TO:
        keep = calls[order] != "negative"
        order = order[keep]
        note = el("p", text(f"This run has {fmt.number(run.n_samples)} specimens: the "
                            f"{fmt.number(len(order))} that are not called negative are listed "
                            "here; every pool with its members is in the run summary."),
                  class_="muted")
    cts = _ct_by_pool(run)
    entries = "".join(entry(int(i), run, posterior, calls, cts) for i in order)
    lead = ("For each specimen, most probable first: the pools it is in, what they read and the "
            "other members' probabilities. A positive pool whose other members are all unlikely "
            "points at this specimen; one shared with a likely positive explains less. Open an "
            "entry here or follow a specimen's link in the calls table or the plate map.")
    return section("why", "Why each specimen is where it is", note + el(
        "div", entries, class_="why-list"), lead)
