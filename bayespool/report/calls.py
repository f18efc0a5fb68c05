"""The calls: one row per specimen with its probability and call, and the map of them (plate map
when wells are known, otherwise a ranked chart).

The table is complete HTML and reads without any script, positives and inconclusives first; the
page's small script adds sorting by any column and filtering by call and by text.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import attr, text
from .legend import legend
from ..result_protocol import file_frame
from .markup import el, section
from .palette import styles
from .plate import n_placed, place, plate_map
from .ranked import ranked_chart

CALL_RANK = {"negative": 0, "inconclusive": 1, "positive": 2}
LEAD_COLUMNS = ("sample", "probability", "call", "prior")


def pool_ids_column(run, n: int) -> np.ndarray:
    """Each specimen's pools as text (``P1, P7``), the read ones first."""
    out = np.full(n, "", dtype=object)
    read = run.pool_read
    for i in range(min(n, run.n_samples)):
        pools = run.pools_of(i)
        if len(pools):
            pools = sorted(pools.tolist(), key=lambda t: (not read[t], t))
            out[i] = ", ".join(str(run.pool_ids[t]) for t in pools)
    return out


def calls_frame(posterior, run=None) -> pd.DataFrame:
    """The posterior table plus an input-order column, each specimen's pool IDs and, when known,
    plate and well."""
    frame = file_frame(posterior.to_frame())
    frame.insert(0, "order", np.arange(1, len(frame) + 1))
    if run is not None and run.n_samples == len(frame):
        at = list(frame.columns).index("pools") + 1 if "pools" in frame.columns else len(frame.columns)
        frame.insert(at, "pool_ids", pool_ids_column(run, len(frame)))
    samples = getattr(run, "samples", None) if run is not None else None
    if samples is not None:
        for col in ("plate", "well"):
            if col in samples.columns and col not in frame.columns:
                values = pd.Series("", index=range(len(frame)), dtype=object)
                idx = samples.index[(samples.index >= 0) & (samples.index < len(frame))]
                values.loc[idx] = samples.loc[idx, col].astype(str).to_numpy()
                frame[col] = values.to_numpy()
    return frame


def display_order(frame: pd.DataFrame) -> np.ndarray:
    """Positives, then inconclusives, then negatives; most probable first; input order breaks ties."""
    rank = frame["call"].map(CALL_RANK).fillna(1).to_numpy()
    return np.lexsort((frame["order"].to_numpy(), -frame["probability"].to_numpy(float), -rank))


def calls_table(frame: pd.DataFrame) -> str:
    """The sortable, filterable calls table (every column of ``frame``)."""
    cols = list(frame.columns)
    numeric = {c: pd.api.types.is_numeric_dtype(frame[c]) and not
               pd.api.types.is_bool_dtype(frame[c]) for c in cols}
    head = "".join(el("th", text(fmt.label(c)), scope="col", data_key=c,
                      data_type="num" if numeric[c] or c == "call" else "text") for c in cols)
    order = display_order(frame)
    shown = frame.iloc[order]
    colours = styles(shown["probability"].to_numpy(float))
    rows = []
    for rec, colour_style in zip(shown.to_dict("records"), colours):
        cells = []
        for c in cols:
            v = rec[c]
            if c == "sample":
                cells.append(f'<th scope="row"><a class="id" href="#why-{int(rec["order"]) - 1}"'
                             f' title="why this call: its pools">{text(v)}</a></th>')
            elif c == "probability":
                cells.append(f'<td class="num prob" data-value="{fmt.exact(v)}" '
                             f'style="{colour_style}">{text(fmt.prob_long(v))}</td>')
            elif c == "call":
                cells.append(f'<td data-sort="{CALL_RANK.get(str(v), 1)}"><span class="call '
                             f'call-{attr(v)}">{text(v)}</span></td>')
            elif numeric[c] and pd.notna(v):
                cells.append(f'<td class="num" data-value="{fmt.exact(v)}">'
                             f'{text(fmt.number(v))}</td>')
            elif pd.isna(v):
                cells.append('<td class="blank"></td>')
            else:
                cells.append(f"<td>{text(v)}</td>")
        rows.append(f'<tr data-call="{attr(rec["call"])}" data-sample="{attr(rec["sample"])}">'
                    f'{"".join(cells)}</tr>')
    return el("table", el("thead", el("tr", head)) + el("tbody", "\n".join(rows)),
              class_="data calls", id="calls-table")


CONTROLS = (
    '<div class="controls" id="calls-controls" hidden>'
    '<label>Find <input type="search" id="calls-search" placeholder="specimen, plate, well" '
    'autocomplete="off"></label> '
    '<label>Call <select id="calls-call"><option value="">all</option>'
    '<option value="positive">positive</option><option value="inconclusive">inconclusive</option>'
    '<option value="negative">negative</option></select></label> '
    '<button type="button" id="calls-reset">Show all</button> '
    '<span id="calls-status" role="status" aria-live="polite"></span></div>'
)


def calls_section(posterior, run=None) -> str:
    frame = calls_frame(posterior, run)
    lead = ("One row per specimen. The probability is the posterior probability that the specimen "
            "is positive given every readout of the run and the assay model; the call applies the "
            "thresholds. Click a column heading to sort; use the boxes to filter.")
    noscript = ('<noscript><p class="muted">Sorting and filtering need JavaScript; the table lists '
                'positives first, then inconclusives, then negatives.</p></noscript>')
    body = CONTROLS + noscript + el("div", calls_table(frame), class_="scroll tall")
    return section("calls", "Calls", body, lead)


def map_section(posterior, run=None) -> str:
    """The plate map when the samples carry wells, otherwise the ranked chart; with the legend."""
    ids = np.asarray(posterior.sample_ids, dtype=object)
    prob = np.asarray(posterior.probability, dtype=float)
    calls = posterior.calls()
    placement = place(getattr(run, "samples", None), len(ids)) if run is not None else None
    key = legend(posterior.negative_below, posterior.positive_above, marks=placement is not None)
    if placement is not None:
        lead = (f"{fmt.number(n_placed(placement))} specimen(s) in their wells on "
                f"{len(placement.plates)} plate(s); hover a well for its specimen ID.")
        return section("plate-map", "Plate map", key + el("div", plate_map(placement, ids, prob,
                                                                            calls),
                                                          class_="plates"), text(lead))
    lead = ("The samples file gives no plate wells, so specimens are ranked by probability: "
            "the most probable first.")
    chart = ranked_chart(ids, prob, calls, posterior.negative_below, posterior.positive_above)
    return section("ranked", "Specimens ranked by probability",
                   key + el("div", chart, class_="scroll"), lead)
