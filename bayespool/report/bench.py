"""The bench sections: control status per plate, and the destination plates of a worklist.

``controls`` is a :class:`bayespool.controls.ControlCheck` (its ``plates`` and ``controls``
frames); ``worklist`` a :class:`bayespool.worklist.Worklist` (its ``destinations``: plate ->
{well: pool}). Both are drawn from their data only; every string goes through the escaping helpers.
"""
from __future__ import annotations

from ..wells import FORMATS, parse_well
from .escape import text
from .markup import el, frame_table, section


def controls_section(check) -> str:
    """One row per plate (passed or failed and why), then one row per control."""
    if check is None or not len(check.plates):
        return ""
    failed = check.failed_plates
    lead = ("Every plate's controls passed." if not failed else
            f"{len(failed)} plate(s) failed their controls: their readouts were left out of the "
            "decode and their specimens need retesting.")
    body = frame_table(check.plates, caption="Control status per plate",
                       row_attrs=lambda i: {"class_": f"qc-{check.plates['status'].iat[i]}"})
    body += frame_table(check.controls, caption="Controls")
    if check.dropped_pools:
        pools = ", ".join(sorted(map(str, check.dropped_pools))[:200])
        body += el("p", "Readouts left out (pools): " + text(pools))
    return section("controls", "Controls", body, lead)


def _plate_grid(name: str, size: int, wells: dict) -> str:
    n_rows, n_cols = FORMATS[size]
    cells = {parse_well(w): pool for w, pool in wells.items()}
    head = el("tr", el("th", "", class_="corner") +
              "".join(el("th", str(c + 1), scope="col") for c in range(n_cols)))
    body = []
    for r in range(n_rows):
        row = [el("th", chr(ord("A") + r), scope="row")]
        for c in range(n_cols):
            pool = cells.get((r, c))
            row.append(el("td", "", class_="well empty") if pool is None else
                       el("td", el("span", text(pool), class_="id"), class_="well",
                          data_pool=str(pool)))
        body.append(el("tr", "".join(row)))
    caption = el("caption", text(f"Destination plate {name}") + " " +
                 el("span", f"({size} wells)", class_="muted"))
    return el("table", caption + el("thead", head) + el("tbody", "".join(body)),
              class_=f"plate p{size}", data_plate=name)


def destinations_section(worklist) -> str:
    """The destination plate map: which pool each well of each destination plate receives."""
    if worklist is None or not worklist.destinations:
        return ""
    body = "".join(_plate_grid(name, worklist.plate_size, wells)
                   for name, wells in worklist.destinations.items())
    lead = (f"{worklist.n_pools} pools of {worklist.pool_volume:g} uL, every member giving an "
            "equal share (each pool dilutes its members exactly k-fold).")
    return section("destinations", "Destination plates", body, lead)
