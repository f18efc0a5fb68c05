"""The planned next pools: what to test next, pool by pool, with the planner's own numbers.

The plan is a DataFrame in the layout format (``pool``, ``sample``) plus any columns the planner
adds. Columns whose value is the same on every row of a pool (such as the probability that the pool
reads positive, or its expected information in bits) are shown once per pool; the others beside each
member. Nothing here depends on particular column names.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, section, value_html
from .palette import style


def pool_level_columns(plan: pd.DataFrame) -> list:
    """Columns other than pool and sample that are constant within every pool."""
    cols = [c for c in plan.columns if c not in ("pool", "sample")]
    grouped = plan.groupby("pool", sort=False)
    return [c for c in cols if bool((grouped[c].nunique(dropna=False) <= 1).all())]


def _format(column, value) -> str:
    name = str(column).lower()
    if fmt.is_number(value):
        if "bit" in name:
            return f"{float(value):.3f} bits"
        if "prob" in name or name.startswith("p_") or name in ("p", "p_positive"):
            return fmt.prob_long(value)
        return fmt.number(value)
    return str(value)


def _members(group: pd.DataFrame, member_cols, posterior) -> str:
    out = []
    index = None
    if posterior is not None:
        index = pd.Index(posterior.sample_ids)
    for _, row in group.iterrows():
        s = row["sample"]
        piece = el("span", text(s), class_="id")
        if index is not None:
            j = index.get_indexer([s])[0]
            if j >= 0:
                p = float(posterior.probability[j])
                piece += " " + el("span", text(fmt.prob_short(p)), class_="chip", style=style(p),
                                  title=f"current P(positive) {fmt.prob_long(p)}")
        extras = [f"{fmt.label(c)} {_format(c, row[c])}" for c in member_cols if pd.notna(row[c])]
        if extras:
            piece += " " + el("span", text("(" + ", ".join(extras) + ")"), class_="muted")
        out.append(el("li", piece))
    return el("ul", "".join(out), class_="members")


def plan_section(plan: pd.DataFrame, posterior=None) -> str:
    if plan is None:
        return ""
    missing = [c for c in ("pool", "sample") if c not in plan.columns]
    if missing:
        raise ValueError(f"the plan lacks column(s) {', '.join(missing)}")
    if len(plan) == 0:
        return section("plan", "Planned next pools", el(
            "p", "No further pools are planned: every specimen is decided by the thresholds."))
    pool_cols = pool_level_columns(plan)
    member_cols = [c for c in plan.columns if c not in ("pool", "sample", *pool_cols)]
    head = el("tr", el("th", "#", scope="col") + el("th", "pool", scope="col") +
              el("th", "size", scope="col") + "".join(
                  el("th", text(fmt.label(c)), scope="col") for c in pool_cols) +
              el("th", "members", scope="col"))
    rows = []
    for j, (pool, group) in enumerate(plan.groupby("pool", sort=False), start=1):
        first = group.iloc[0]
        cells = [el("td", str(j), class_="num"),
                 el("th", el("span", text(pool), class_="id"), scope="row"),
                 el("td", str(len(group)), class_="num")]
        for c in pool_cols:
            v = first[c]
            if fmt.is_number(v) and pd.notna(v):
                cells.append(el("td", text(_format(c, v)), class_="num", data_value=fmt.exact(v)))
            else:
                cells.append(el("td", value_html(v) if pd.notna(v) else ""))
        cells.append(el("td", _members(group, member_cols, posterior)))
        rows.append(el("tr", "".join(cells)))
    n_pools = plan["pool"].nunique()
    totals = f"{n_pools} pool(s), {len(plan)} placement(s) of {plan['sample'].nunique()} specimen(s)"
    bits = [c for c in pool_cols if "bit" in str(c).lower()
            and pd.api.types.is_numeric_dtype(plan[c])]
    if bits:
        per_pool = plan.groupby("pool", sort=False)[bits[0]].first()
        totals += f"; the per-pool {fmt.label(bits[0])} values sum to {float(np.sum(per_pool)):.3f} bits"
    lead = ("The pools suggested for the next round, in the planner's order. They are suggestions "
            "for the laboratory to weigh, not instructions.")
    table = el("table", el("thead", head) + el("tbody", "".join(rows)), class_="data plan")
    return section("plan", "Planned next pools",
                   el("p", text(totals), id="plan-totals") + el("div", table, class_="scroll"), lead)
