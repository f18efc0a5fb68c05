"""Prevalence by group from pooled readouts: estimates, intervals, and a two-group difference.

:func:`estimate_prevalence` splits the pools by the grouping columns, builds each group's
likelihood (:mod:`.likelihood`), and reports the maximum likelihood and bias-corrected estimates
(:mod:`.estimators`), the interval by the chosen method (:mod:`.intervals`) and the minimum
infection rate; :class:`PrevalenceEstimates` is the result.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError
from ..result_protocol import Result
from .checks import check_beta_prior, check_level, check_positive
from .difference import Difference, difference
from .estimators import (Estimate, bias_corrected, clipped_note, maximum_likelihood,
                         minimum_infection_rate)
from .integrated import METHODS as INTEGRATED_METHODS
from .integrated import IntegratedLikelihood, draw_count
from .intervals import METHODS, interval
from .likelihood import PoolCells, PooledLikelihood
from .pools import PooledData, pools_from_frame

__all__ = ["estimate_prevalence", "PrevalenceEstimates", "GroupEstimate", "PERFECT"]

PERFECT = "perfect (Se = Sp = 1), as the classic estimators assume"
ALL = "all"   # the label of the one group when nothing is grouped


@dataclass(frozen=True)
class GroupEstimate:
    """One group's counts, estimates (proportions, not scaled by ``per``) and notes."""

    group: dict
    pools: int
    positive_pools: int
    specimens: int
    mle: float
    bias_corrected: float
    lower: float
    upper: float
    minimum_infection_rate: float
    notes: tuple = ()

    @property
    def label(self) -> str:
        return " / ".join(str(v) for v in self.group.values()) if self.group else ALL


@dataclass(eq=False, repr=False)
class PrevalenceEstimates(Result):
    """Per-group prevalence estimates from pooled readouts.

    ``to_frame()`` is indexed by the grouping columns; estimates there (and in ``summary()``) are
    per ``per`` specimens. ``difference`` is the two-group comparison when there is one.
    """

    groups: list
    by: list
    interval: str
    level: float
    per: float
    assay: str
    difference: Difference | None = None
    notes: list = field(default_factory=list)
    prior: tuple = (1.0, 1.0)

    SCALED = ("mle", "bias_corrected", "lower", "upper", "minimum_infection_rate")

    def to_frame(self) -> pd.DataFrame:
        rows = []
        for g in self.groups:
            row = dict(g.group) if self.by else {"group": ALL}
            row.update({"pools": g.pools, "positive_pools": g.positive_pools,
                        "specimens": g.specimens})
            row.update({k: getattr(g, k) * self.per for k in self.SCALED})
            row.update({"interval": self.interval, "level": self.level, "per": self.per,
                        "note": "; ".join(g.notes)})
            rows.append(row)
        cols = (self.by or ["group"]) + ["pools", "positive_pools", "specimens", *self.SCALED,
                                         "interval", "level", "per", "note"]
        return pd.DataFrame(rows, columns=cols).set_index(self.by or ["group"])

    def summary(self) -> dict:
        out = {"groups": [], "assay": self.assay, "interval": self.interval, "level": self.level,
               "per": self.per}
        for g in self.groups:
            item = {"group": dict(g.group), "pools": g.pools, "positive_pools": g.positive_pools,
                    "specimens": g.specimens}
            item.update({k: _json_number(getattr(g, k) * self.per) for k in self.SCALED})
            item.update({"interval": self.interval, "level": self.level, "per": self.per})
            if g.notes:
                item["notes"] = list(g.notes)
            out["groups"].append(item)
        if self.interval == "bayes":
            out["prior"] = list(self.prior)
        if self.difference is not None:
            out["difference"] = self.difference.to_dict()
        if self.notes:
            out["notes"] = list(self.notes)
        return out

    def __str__(self) -> str:
        lines = [f"Prevalence per {self.per:g} specimens; {self.level:.0%} {self.interval} "
                 f"interval; assay: {self.assay}"]
        head = ["group", "pools", "positive", "specimens", "MLE", "bias-corrected", "lower",
                "upper", "MIR"]
        body = [[g.label, str(g.pools), str(g.positive_pools), str(g.specimens)]
                + [_cell(getattr(g, k) * self.per) for k in self.SCALED] for g in self.groups]
        widths = [max(len(h), *(len(r[i]) for r in body)) if body else len(h)
                  for i, h in enumerate(head)]
        lines.append("  ".join(h.rjust(w) if i else h.ljust(w)
                               for i, (h, w) in enumerate(zip(head, widths))))
        for r in body:
            lines.append("  ".join(c.rjust(w) if i else c.ljust(w)
                                   for i, (c, w) in enumerate(zip(r, widths))))
        for g in self.groups:
            for n in g.notes:
                lines.append(f"note ({g.label}): {n}")
        if self.difference is not None:
            lines.append(f"difference: {self.difference}")
        lines.extend(f"note: {n}" for n in self.notes)
        return "\n".join(lines)

    def _brief(self) -> str:
        return (f"{len(self.groups)} group(s), interval={self.interval!r}, "
                f"level={self.level:g}, per={self.per:g}")


def _cell(v: float) -> str:
    return "n/a" if math.isnan(v) else f"{v:.4g}"


def _json_number(v: float):
    return None if v is None or (isinstance(v, float) and math.isnan(v)) else float(v)


def _sort_key(values: pd.Series):
    """Numbers in numeric order, anything else as text."""
    num = pd.to_numeric(values, errors="coerce")
    return num if num.notna().all() else values.astype(str)


def _group_frames(data: PooledData, by: list):
    f = data.frame
    if not by:
        yield {}, f
        return
    keys = f[by].drop_duplicates().sort_values(by, key=_sort_key)
    for key in keys.itertuples(index=False):
        sel = np.ones(len(f), dtype=bool)
        for c, v in zip(by, key):
            sel &= (f[c] == v).to_numpy()
        yield dict(zip(by, key)), f[sel]


def estimate_prevalence(pools, assay=None, *, by=(), interval: str | None = None,
                        level: float = 0.95, per: float = 1.0, prior=(1.0, 1.0),
                        compare=None, assay_uncertainty: bool = False) -> PrevalenceEstimates:
    """Prevalence by group from pooled readouts of pools of any sizes.

    Parameters
    ----------
    pools : PooledData or pandas.DataFrame
        Pools from :func:`read_pools` or :func:`pools_from_run`, or a frame with the columns of a
        pools file (``pool,size,result`` plus grouping columns).
    assay : bayespool.assay.Assay, optional
        Specificity and Se(k, d); the likelihood then sums over the number of positives in a pool
        (Tu, Litvak & Pagano 1995). None means a perfect test (Se = Sp = 1).
    by : str or sequence of str
        Grouping columns; none gives one group of all pools.
    interval : {'skew-score', 'score', 'likelihood', 'exact', 'bayes'}, optional
        Interval method (see :mod:`bayespool.surveillance.intervals`); default 'skew-score', or
        'likelihood' with ``assay_uncertainty``.
    level : float
        Confidence level, strictly between 0 and 1.
    per : float
        Estimates are per this many specimens (e.g. 1000 for an infection rate per 1000).
    prior : (float, float)
        Beta(a, b) prior of ``interval='bayes'``.
    compare : (str, str), optional
        Two group labels (values joined by ' / ' when grouping by several columns) whose
        difference is estimated; by default when ``by`` is one column with exactly two values.
    assay_uncertainty : bool
        Integrate the likelihood over the fitted assay's uncertainty (the ``[fit.uncertainty]``
        table ``calibrate`` writes; :mod:`bayespool.surveillance.integrated`): every pool shares
        one assay, so its error widens the interval instead of averaging out. Intervals
        'likelihood' and 'bayes' only; no bias-corrected estimate; the difference of two groups
        then takes the assay as fitted (said in a note).

    Returns
    -------
    PrevalenceEstimates

    Raises
    ------
    InputError
        A bad option (naming the parameter) or pools without readouts.

    References
    ----------
    Thompson (1962), Biometrics 18; Walter, Hildreth & Beaty (1980), Am. J. Epidemiol. 112;
    Hepworth (1996), Biometrics 52; Hepworth & Biggerstaff (2017), JABES 22; Tu, Litvak & Pagano
    (1995), Statistics in Medicine 14.

    Examples
    --------
    >>> import bayespool
    >>> pools = bayespool.read_pools("datasets/surveillance/pools.csv")
    >>> est = bayespool.estimate_prevalence(pools, by=["site"], per=1000)
    >>> est.to_frame().index.tolist()
    ['creek', 'meadow']
    """
    data = pools if isinstance(pools, PooledData) else pools_from_frame(pools)
    by = data.check_by(by)
    if interval is None:
        interval = "likelihood" if assay_uncertainty else "skew-score"
    if interval not in METHODS:
        raise InputError(f"`interval` must be one of {', '.join(METHODS)}, got {interval!r}")
    spread = _spread(assay, interval, data.source) if assay_uncertainty else None
    level, per, prior = check_level(level), check_positive(per, "per"), check_beta_prior(prior)
    if not len(data.frame):
        raise InputError("no pool has a readout", data.source)
    groups, liks = [], {}
    for key, frame in _group_frames(data, by):
        cells = PoolCells.from_pools(frame["size"], frame["n_positive"], frame["n_negative"])
        lik = PooledLikelihood(cells, assay, data.source)
        if spread is None:
            mle = maximum_likelihood(lik)
            bc = bias_corrected(lik, mle)
            lo, up = _interval(lik, interval, level, mle.value, prior, key)
        else:
            mixed = IntegratedLikelihood(cells, spread, data.source)
            mle = maximum_likelihood(mixed)
            bc = Estimate(float("nan"))
            lo, up = _interval(mixed, interval, level, mle.value, prior, key)
        note = clipped_note(lik, mle)
        g = GroupEstimate(key, cells.pools, cells.positive_pools(), cells.specimens, mle.value,
                          bc.value, lo, up, minimum_infection_rate(lik),
                          (note,) if note else ())
        groups.append(g)
        liks[g.label] = (lik, g)
    notes = list(data.notes)
    if assay is None:
        notes.append("no assay given: the test is taken as " + PERFECT)
    diff = _difference(liks, by, compare, level, per)
    described = PERFECT if assay is None else assay.describe()
    if spread is not None:
        described += (f", integrated over the fit's uncertainty ({draw_count(spread)} assays "
                      "drawn from it; one shared by every pool)")
        notes.append("estimates and intervals integrate the likelihood over the fitted assay's "
                     "uncertainty; no bias-corrected estimate is defined there"
                     + ("; the difference takes the assay as fitted" if diff is not None else ""))
    return PrevalenceEstimates(groups, by, interval, level, per, described, diff, notes, prior)


def _spread(assay, interval: str, source):
    """The assay's fitted uncertainty, checked for what ``assay_uncertainty`` needs."""
    if assay is None:
        raise InputError("`assay_uncertainty` needs an `assay` written by calibrate (with its "
                         "[fit.uncertainty] table)")
    if interval not in INTEGRATED_METHODS:
        raise InputError(f"`interval` {interval!r} needs the score of one assay; over the "
                         "assay's uncertainty use "
                         f"{' or '.join(map(repr, INTEGRATED_METHODS))}")
    from ..assay_spread import integrate
    return integrate(assay)


def _interval(lik, method, level, estimate, prior, key):
    try:
        return interval(lik, method, level, estimate, prior)
    except InputError as exc:
        where = f" (group {' / '.join(map(str, key.values()))})" if key else ""
        raise InputError(exc.message + where, parameters=exc.parameters) from None


def _difference(liks: dict, by: list, compare, level: float, per: float):
    if compare is None:
        if len(by) == 1 and len(liks) == 2:
            compare = list(liks)
        else:
            return None
    compare = [compare] if isinstance(compare, str) else list(compare)
    if len(compare) == 1 and "," in compare[0]:
        compare = compare[0].split(",")
    compare = [str(c).strip() for c in compare]
    if len(compare) != 2 or compare[0] == compare[1]:
        raise InputError(f"`compare` must name two different groups, got {', '.join(compare)}")
    for c in compare:
        if c not in liks:
            raise InputError(f"`compare`: no group {c!r} (groups: {', '.join(liks)})")
    (la, ga), (lb, gb) = liks[compare[0]], liks[compare[1]]
    return difference(la, lb, ga.mle, gb.mle, level=level, names=compare, per=per)
