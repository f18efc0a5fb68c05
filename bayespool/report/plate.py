"""The plate map: each specimen in its well, coloured by its probability, the value printed in it.

Drawn when the samples file has a ``well`` column (``plate`` too when there are several plates).
Wells are read by :mod:`bayespool.wells` (the samples file refuses wells that are not real or
taken twice); a plate whose wells all fit 8 x 12 is drawn as a 96-well plate, otherwise as a
384-well plate. Specimens without a usable well are listed under the map; they are in the calls
table like every other.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..wells import FORMATS, parse_well, plate_format  # noqa: F401 (plate_format re-exported)
from . import formatting as fmt
from .escape import text
from .markup import el
from .palette import styles

MARKS = {"positive": "+", "inconclusive": "?", "negative": ""}


@dataclass
class Plate:
    name: str
    wells: int
    cells: dict = field(default_factory=dict)  # (row, col) -> specimen index


@dataclass
class Placement:
    plates: list
    unplaced: list  # (specimen index, reason)


def place(samples, n_specimens: int) -> Placement | None:
    """Put specimens on plates from the samples frame (index = specimen index); None without wells."""
    if samples is None or "well" not in samples.columns:
        return None
    plate_col = samples["plate"] if "plate" in samples.columns else None
    order, by_name, unplaced = [], {}, []
    for idx, well in zip(samples.index, samples["well"]):
        if not (0 <= int(idx) < n_specimens):
            continue
        pos = parse_well(well)
        if pos is None:
            unplaced.append((int(idx), "no well given" if str(well).strip() == ""
                             else f"well {well!r} is not a row letter and column number"))
            continue
        if pos[0] >= FORMATS[384][0] or pos[1] >= FORMATS[384][1]:
            unplaced.append((int(idx), f"well {well} is outside a 384-well plate"))
            continue
        name = "" if plate_col is None else str(plate_col.loc[idx])
        if name not in by_name:
            by_name[name] = {}
            order.append(name)
        cells = by_name[name]
        if pos in cells:
            unplaced.append((int(idx), f"well {well} is already taken"))
            continue
        cells[pos] = int(idx)
    plates = [Plate(name, plate_format([r for r, _ in by_name[name]],
                                       [c for _, c in by_name[name]]), by_name[name])
              for name in order]
    if not plates:
        return None
    return Placement(plates, unplaced)


def plate_html(plate: Plate, sample_ids, probability, calls, colours) -> str:
    """One plate as a grid table; every well prints its probability and a mark for its call."""
    n_rows, n_cols = FORMATS[plate.wells]
    head = el("tr", el("th", "", class_="corner") +
              "".join(el("th", str(c + 1), scope="col") for c in range(n_cols)))
    body = []
    for r in range(n_rows):
        letter = chr(ord("A") + r)
        cells = [el("th", letter, scope="row")]
        for c in range(n_cols):
            well = f"{letter}{c + 1}"
            i = plate.cells.get((r, c))
            if i is None:
                cells.append(el("td", "", class_="well empty", title=f"{well}: no specimen"))
                continue
            p, call = float(probability[i]), str(calls[i])
            tip = f"{sample_ids[i]} \u2014 well {well} \u2014 P(positive) {fmt.prob_long(p)} \u2014 {call}"
            mark = MARKS.get(call, "")
            content = el("span", text(fmt.prob_short(p)), class_="wp")
            if mark:
                content += el("span", mark, class_="wm", aria_hidden="true")
            content = el("a", content, href=f"#why-{int(i)}", class_="why-link")
            cells.append(el("td", content, class_=f"well call-{call}", style=colours[i], title=tip,
                            data_sample=sample_ids[i], data_value=fmt.exact(p)))
        body.append(el("tr", "".join(cells)))
    size = f"{plate.wells} wells, {n_rows} \u00d7 {n_cols}"
    name = f"Plate {plate.name}" if plate.name else "Plate"
    caption = el("caption", text(name) + " " + el("span", f"({size})", class_="muted"))
    return el("table", caption + el("thead", head) + el("tbody", "".join(body)),
              class_=f"plate p{plate.wells}", data_plate=plate.name)


def plate_map(placement: Placement, sample_ids, probability, calls) -> str:
    """Every plate, then the specimens that could not be placed."""
    colours = styles(probability)
    parts = [plate_html(p, sample_ids, probability, calls, colours) for p in placement.plates]
    if placement.unplaced:
        items = "".join(el("li", el("span", text(sample_ids[i]), class_="id") + " \u2014 " +
                           text(why) + f" (P = {text(fmt.prob_short(probability[i]))})")
                        for i, why in placement.unplaced[:200])
        more = len(placement.unplaced) - 200
        tail = el("li", f"\u2026 and {more} more (see the calls table)") if more > 0 else ""
        parts.append(el("div", el("p", f"{len(placement.unplaced)} specimen(s) not on the map:") +
                        el("ul", items + tail), class_="unplaced"))
    return "".join(parts)


def n_placed(placement: Placement) -> int:
    return int(sum(len(p.cells) for p in placement.plates))

