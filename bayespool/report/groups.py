"""Ambiguity: specimens whose readouts say that some of them are positive without saying which.

When the decoder reports ambiguity groups (``Posterior.diagnostics["ambiguity_groups"]`` or a
``Posterior.ambiguity_groups`` attribute: a list of ``{"samples": [...], "probability": p, ...}``)
they are listed as reported. Otherwise the section shows what the marginal probabilities alone can
say: each pool that read positive and still holds an inconclusive specimen, with its members'
probabilities and the expected number of positives among them (the sum of the marginals).
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from . import formatting as fmt
from .escape import text
from .markup import el, section, value_html
from .palette import style

MAX_ROWS = 200


def reported_groups(posterior):
    """The decoder's ambiguity groups, or None when it reported none."""
    groups = getattr(posterior, "ambiguity_groups", None)
    if groups is None:
        groups = (posterior.diagnostics or {}).get("ambiguity_groups")
    return None if groups is None else list(groups)


def _member(posterior, s) -> str:
    """One specimen (an ID or an index into the posterior) with its probability."""
    ids = posterior.sample_ids
    idx = None
    if isinstance(s, (int, np.integer)) and not isinstance(s, bool) and 0 <= int(s) < len(ids):
        idx = int(s)
    else:
        hit = np.flatnonzero(ids == s)
        idx = int(hit[0]) if len(hit) else None
    if idx is None:
        return el("span", text(s), class_="id")
    p = float(posterior.probability[idx])
    return (el("span", text(ids[idx]), class_="id") + " " +
            el("span", text(fmt.prob_short(p)), class_="chip", style=style(p)))


def groups_table(posterior, groups) -> str:
    extra = []
    for g in groups:
        if isinstance(g, Mapping):
            extra += [k for k in g if k not in ("samples", "probability") and k not in extra]
    head = el("tr", el("th", "group", scope="col") + el("th", "specimens", scope="col") +
              el("th", "probability (as reported)", scope="col") +
              "".join(el("th", text(fmt.label(k)), scope="col") for k in extra))
    rows = []
    for j, g in enumerate(groups[:MAX_ROWS], start=1):
        members = g.get("samples", []) if isinstance(g, Mapping) else list(g)
        prob = g.get("probability") if isinstance(g, Mapping) else None
        cells = [el("td", str(j), class_="num"),
                 el("td", ", ".join(_member(posterior, s) for s in members)),
                 el("td", text(fmt.prob_long(prob)), class_="num", data_value=fmt.exact(prob))
                 if fmt.is_number(prob) else el("td", "", class_="blank")]
        cells += [el("td", value_html(g.get(k))) for k in extra] if isinstance(g, Mapping) else \
            [el("td", "") for _ in extra]
        rows.append(el("tr", "".join(cells)))
    more = el("p", f"{len(groups) - MAX_ROWS} more group(s) not shown.", class_="muted") \
        if len(groups) > MAX_ROWS else ""
    return el("table", el("thead", head) + el("tbody", "".join(rows)), class_="data groups") + more


def unresolved_pools(run, posterior) -> list:
    """Pools of two or more specimens with a positive readout and an inconclusive member."""
    undecided = np.zeros(posterior.n_samples, bool)
    undecided[posterior.undecided()] = True
    out = []
    for t in np.flatnonzero((run.n_positive > 0) & (run.pool_size > 1)):
        if undecided[run.members(int(t))].any():
            out.append(int(t))
    return out


def pools_table(run, posterior, pools) -> str:
    head = el("tr", "".join(el("th", h, scope="col") for h in (
        "pool", "readouts (+/\u2212)", "members and probabilities", "expected positives")))
    rows = []
    for t in pools[:MAX_ROWS]:
        members = run.members(t)
        expected = float(np.sum(posterior.probability[members]))
        rows.append(el("tr", el("th", el("span", text(run.pool_ids[t]), class_="id"), scope="row") +
                       el("td", text(f"{run.n_positive[t]} / {run.n_negative[t]}")) +
                       el("td", ", ".join(_member(posterior, int(i)) for i in members)) +
                       el("td", text(f"{expected:.3f}"), class_="num",
                          data_value=fmt.exact(expected))))
    more = el("p", f"{len(pools) - MAX_ROWS} more pool(s) not shown.", class_="muted") \
        if len(pools) > MAX_ROWS else ""
    return el("table", el("thead", head) + el("tbody", "".join(rows)), class_="data groups") + more


def groups_section(posterior, run=None) -> str:
    groups = reported_groups(posterior)
    if groups:
        lead = ("Groups of specimens that the decoder found hard to tell apart: the readouts say "
                "that some of them are positive without saying which. A further test that splits "
                "a group resolves it.")
        return section("ambiguity", "Ambiguity groups", groups_table(posterior, groups), lead)
    if groups is not None:
        return section("ambiguity", "Ambiguity groups",
                       el("p", "The decoder found no ambiguity groups."))
    if run is None:
        return section("ambiguity", "Ambiguity groups",
                       el("p", "The decoder reported no ambiguity groups.", class_="muted"))
    pools = unresolved_pools(run, posterior)
    lead = ("The decoder reported no ambiguity groups; listed here is each pool of several "
            "specimens that read positive and still holds an inconclusive specimen. The expected "
            "number of positives among its members is the sum of their probabilities.")
    if not pools:
        return section("ambiguity", "Ambiguity groups", el(
            "p", "No pool of several specimens that read positive holds an inconclusive "
            "specimen."), lead)
    return section("ambiguity", "Ambiguity groups", pools_table(run, posterior, pools), lead)
