"""Worklists: the transfers that build a layout's pools, one row per specimen per pool.

Each pool of ``k`` specimens gets ``pool_volume / k`` of every member, so every pool holds
``pool_volume`` and each specimen in it is diluted exactly k-fold (the dilution the assay model
assumes). Pools are laid on destination plates in layout order, down the columns (A1, B1, ..., H1,
A2, ...: the order of an 8-channel head, common practice), skipping wells kept for controls. The
file is generic CSV, one transfer per row::

    source_plate,source_well,destination_plate,destination_well,volume_ul,sample,pool

When the samples file has ``volume_ul``, the volume each specimen has left after the worklist is
reported, and a worklist that would draw more than a specimen holds is refused.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .errors import InputError
from .result_protocol import Result, membership_index
from .plates import FORMATS, check_plate_size, fill_order, parse_well, plate_positions, well_name

COLUMNS = ["source_plate", "source_well", "destination_plate", "destination_well", "volume_ul",
           "sample", "pool"]
DEFAULT_POOL_VOLUME = 200.0
DEFAULT_PREFIX = "POOLS"


@dataclass(repr=False)
class Worklist(Result):
    """The transfers (``frame``, :data:`COLUMNS`), the destination plates (plate -> {well: pool}),
    and, when the samples gave volumes, each specimen's volume before and after (``volumes``)."""

    frame: pd.DataFrame
    destinations: dict
    pool_volume: float
    plate_size: int
    volumes: pd.DataFrame | None = None
    notes: list = field(default_factory=list)

    def to_frame(self) -> pd.DataFrame:
        """The transfers, one row per membership (index ``membership``)."""
        return self.frame.set_axis(membership_index(len(self.frame)))

    @property
    def n_pools(self) -> int:
        return sum(len(w) for w in self.destinations.values())

    def summary(self) -> dict:
        out = {"transfers": len(self.frame), "pools": self.n_pools,
               "pool_volume_ul": self.pool_volume, "destination_plate_size": self.plate_size,
               "destination_plates": list(self.destinations), "notes": list(self.notes)}
        if self.volumes is not None:
            low = self.volumes.sort_values("left_ul").head(1)
            out["least_volume_left"] = ({"sample": str(low["sample"].iat[0]),
                                         "left_ul": float(low["left_ul"].iat[0])}
                                        if len(low) else None)
            vol = self.volumes.astype(object).where(self.volumes.notna(), None)
            out["volumes"] = vol.to_dict("records")
        return out

    def __str__(self) -> str:
        s = self.summary()
        out = [f"worklist: {s['transfers']} transfers into {s['pools']} pools of "
               f"{self.pool_volume:g} uL on {len(self.destinations)} destination plate(s) of "
               f"{self.plate_size} wells ({', '.join(self.destinations)})"]
        if self.volumes is not None and s.get("least_volume_left"):
            low = s["least_volume_left"]
            out.append(f"  least volume left: {low['left_ul']:.4g} uL ({low['sample']})")
        out += [f"  note: {n}" for n in self.notes]
        return "\n".join(out)

    def _brief(self) -> str:
        return (f"transfers={len(self.frame)}, pools={self.n_pools}, "
                f"pool_volume={self.pool_volume:g}")


def _positive_volume(value, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a number of microlitres, got {value!r}") from None
    if not np.isfinite(v) or v <= 0:
        raise InputError(f"`{name}` must be a positive number of microlitres, got {value!r}")
    return v


def reserved_wells(wells, plate_size: int) -> set:
    """Wells (names) kept free on every destination plate, e.g. for controls."""
    out = set()
    n_rows, n_cols = FORMATS[plate_size]
    for w in wells or ():
        pos = parse_well(w)
        if pos is None or pos[0] >= n_rows or pos[1] >= n_cols:
            raise InputError(f"reserved well {w!r} is not a well of a {plate_size}-well plate")
        out.add(pos)
    return out


def build_worklist(layout: pd.DataFrame, samples: pd.DataFrame, *,
                   pool_volume: float = DEFAULT_POOL_VOLUME, plate_size: int = 96,
                   prefix: str = DEFAULT_PREFIX, reserve=None, skip_pools=()) -> Worklist:
    """Transfers that build the pools of ``layout`` (``pool,sample``) from the wells of ``samples``
    (``sample,well`` and optionally ``plate``, ``volume_ul``).

    Parameters
    ----------
    layout : DataFrame
        One row per membership; pools are laid out in order of first appearance.
    samples : DataFrame
        Where each specimen is; every specimen of the layout needs a well.
    pool_volume : float
        Microlitres in each pool; each of a pool's k members gives ``pool_volume / k``.
    plate_size : int
        96 or 384 wells per destination plate.
    prefix : str
        Destination plates are named ``prefix1``, ``prefix2``, ...
    reserve : iterable of str
        Wells left empty on every destination plate (controls).
    skip_pools : iterable of str
        Pools that need no transfer (a replicate reading of a mix already made).
    """
    pool_volume = _positive_volume(pool_volume, "pool_volume")
    plate_size = check_plate_size(plate_size, "plate_size")
    prefix = str(prefix).strip()
    if not prefix:
        raise InputError("`prefix` must not be empty")
    for col in ("pool", "sample"):
        if col not in layout.columns:
            raise InputError(f"the layout needs a {col!r} column")
    if samples is None or "well" not in samples.columns:
        raise InputError("a worklist needs the samples file's well column (and plate, when "
                         "there are several plates)")
    ids = samples["sample"].astype(str).str.strip().to_numpy(dtype=object)
    pos = plate_positions(samples.reset_index(drop=True), ids)
    index = pd.Index(ids)
    lay = layout[~layout["pool"].isin(set(skip_pools))]
    at = index.get_indexer(lay["sample"].astype(str))
    unknown = at < 0
    if unknown.any():
        bad = lay["sample"].to_numpy()[unknown]
        raise InputError(f"a worklist needs the well of every specimen; {bad[0]!r} is not in the "
                         "samples file" + (f" (and {len(set(bad)) - 1} more)"
                                           if len(set(bad)) > 1 else ""))
    no_well = pos.missing[at]
    if no_well.any():
        bad = list(dict.fromkeys(lay["sample"].to_numpy()[no_well]))
        more = f" and {len(bad) - 3} more" if len(bad) > 3 else ""
        raise InputError(f"a worklist needs the well of every specimen; "
                         f"{', '.join(map(repr, bad[:3]))}{more} ha"
                         f"{'ve' if len(bad) > 1 else 's'} no well")
    pools, owner = np.unique(lay["pool"].astype(str).to_numpy(), return_inverse=True)
    first = pd.Index(lay["pool"].astype(str)).unique()       # order of first appearance
    rank = pd.Index(first).get_indexer(pools)
    owner = rank[owner]
    sizes = np.bincount(owner, minlength=len(first))
    free = [w for w in fill_order(plate_size, "columns") if w not in reserved_wells(reserve,
                                                                                  plate_size)]
    if not free:
        raise InputError("every well of the destination plate is reserved")
    dest_plate = np.array([f"{prefix}{t // len(free) + 1}" for t in range(len(first))],
                          dtype=object)
    dest_well = np.array([well_name(*free[t % len(free)]) for t in range(len(first))],
                         dtype=object)
    order = np.argsort(owner, kind="stable")
    owner, at = owner[order], at[order]
    volume = pool_volume / sizes[owner]
    frame = pd.DataFrame({
        "source_plate": pos.plate[at],
        "source_well": samples["well"].astype(str).str.strip().to_numpy(dtype=object)[at],
        "destination_plate": dest_plate[owner], "destination_well": dest_well[owner],
        "volume_ul": volume, "sample": ids[at], "pool": np.asarray(first, dtype=object)[owner]},
        columns=COLUMNS)
    destinations = {}
    for t, name in enumerate(first):
        destinations.setdefault(dest_plate[t], {})[dest_well[t]] = name
    notes = []
    volumes = None
    if "volume_ul" in samples.columns:
        volumes = _volumes_left(samples, ids, at, volume)
    skipped = sorted(set(skip_pools) & set(layout["pool"].astype(str)))
    if skipped:
        notes.append(f"{len(skipped)} pool(s) are replicate readings of a mix already made and "
                     "need no transfer: " + ", ".join(skipped[:5]) +
                     (" ..." if len(skipped) > 5 else ""))
    return Worklist(frame, destinations, pool_volume, plate_size, volumes, notes)


def specimen_volumes(samples: pd.DataFrame, ids=None, source=None) -> np.ndarray:
    """The ``volume_ul`` column of a samples file as microlitres (NaN where blank).

    ``ids`` name the rows in messages (default: the ``sample`` column); ``source`` is the file."""
    raw = samples["volume_ul"].astype(str).str.strip()
    given = (raw != "").to_numpy()
    have = pd.to_numeric(raw.where(given, "nan"), errors="coerce").to_numpy(dtype=float)
    bad = given & ~(np.isfinite(have) & (have >= 0))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        name = (samples["sample"].astype(str).to_numpy() if ids is None else ids)[i]
        raise InputError(f"volume_ul {raw.iat[i]!r} of {name!r} must be a number of "
                         "microlitres >= 0", source, column="volume_ul")
    return have


def _volumes_left(samples, ids, at, volume) -> pd.DataFrame:
    have = specimen_volumes(samples, ids)
    given = ~np.isnan(have)
    drawn = np.bincount(at, weights=volume, minlength=len(ids))
    used = np.bincount(at, minlength=len(ids)) > 0
    left = have - drawn
    over = used & given & (left < -1e-9)
    if over.any():
        i = int(np.flatnonzero(over)[0])
        raise InputError(f"the worklist draws {drawn[i]:.4g} uL of {ids[i]!r}, which has "
                         f"{have[i]:.4g} uL left (a smaller pool volume, or fewer draws of it: "
                         "the planner's max_draws or the samples file's draws_left)")
    keep = used
    return pd.DataFrame({"sample": ids[keep], "volume_ul": have[keep], "drawn_ul": drawn[keep],
                         "left_ul": np.where(given[keep], left[keep], np.nan)})
