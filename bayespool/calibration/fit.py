"""Fitting the assay from validation runs with known truth.

Specificity and sensitivity separate: readouts of pools with no positive member are Bernoulli(1 - Sp),
so Sp has a closed-form estimate and an exact Clopper-Pearson interval (Clopper & Pearson 1934);
readouts of pools with d >= 1 positives are Bernoulli(Se(k, d)), fitted per family by maximum
likelihood on the unconstrained scale (mle.py) with profile-likelihood or Wald intervals.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.special import xlogy

from ..assay import Assay
from ..errors import InputError
from ..result_protocol import spell
from ..validation import (check_choice, check_count, check_number, check_seed,
                          parameter_error)
from . import boundary
from .binomial import CellLikelihood
from .curve import CurveModel, covariance
from .families import FAMILIES, Family, check_fixed, family
from .goodness import bootstrap_p_value, cell_frame, goodness_of_fit
from .intervals import clopper_pearson
from .mle import Optimum, Profiler, maximize, standard_errors, wald_interval
from .result import Calibration
from .space import Space
from .validation import Cells, ValidationData

INTERVALS = ("profile", "wald")


def _fix(name: str) -> str:
    """How to keep parameter ``name`` at a value (``fixed["name"]``; --fix on the command line)."""
    return spell(f'fixed["{name}"]')


def check_options(model, level, intervals) -> float:
    """The options both fits share: the family (or ``best``), the level and the interval method."""
    check_choice(model, "model", FAMILIES + ("best",))
    check_choice(intervals, "intervals", INTERVALS)
    level = check_number(level, "level")
    if not 0.5 <= level < 1.0:
        raise parameter_error(f"level must be in [0.5, 1), got {level!r}", "level")
    return level
INTERVAL_NAMES = {"profile": "profile likelihood", "wald": "Wald (transformed scale)",
                  "exact": "Clopper-Pearson", "fixed": "fixed"}


@dataclass
class SensitivityFit:
    """The maximum-likelihood fit of one sensitivity family to sensitivity cells."""

    family: Family
    space: Space
    cells: Cells
    objective: CellLikelihood
    optimum: Optimum
    starts: list

    @property
    def loglik(self) -> float:
        return self.optimum.loglik

    @property
    def values(self) -> dict:
        """Natural parameter values; probabilities on their bound are exactly 0 or 1."""
        out = self.space.natural(self.optimum.u)
        for p, lo, hi in zip(self.space.free_params, self.optimum.at_lower, self.optimum.at_upper):
            if p.scale == "logit" and (lo or hi):
                out[p.name] = 0.0 if lo else 1.0
        return out

    def fitted(self, k, d) -> np.ndarray:
        se, _, _ = self.family.evaluate(self.space.full(self.optimum.u), np.asarray(k),
                                        np.asarray(d))
        return se

    def information(self) -> np.ndarray:
        return self.objective.fisher(self.optimum.u)

    def refit(self, detected) -> "SensitivityFit":
        cells = Cells(self.cells.k, self.cells.d, self.cells.trials, np.asarray(detected, float))
        return fit_sensitivity(cells, self.family, self.space.fixed, starts=[self.optimum.u])


def _family_for(model, cells: Cells) -> Family:
    if isinstance(model, Family):
        return model
    entries = sorted(set(zip(cells.k.tolist(), cells.d.tolist()))) if model == "table" else None
    return family(model, entries)


def fit_sensitivity(cells: Cells, model="dilution", fixed: dict | None = None,
                    starts=None, source: str | None = None) -> SensitivityFit:
    """Maximum likelihood for one sensitivity family on cells with d >= 1."""
    fam = _family_for(model, cells)
    space = Space(fam.params(), fixed, source)
    if fam.name == "dilution":
        levels = np.unique(np.round(cells.k / cells.d, 12))
        if len(levels) < space.n_free:
            shown = ", ".join(f"{v:g}" for v in levels)
            raise InputError(f"the dilution model has {space.n_free} free sensitivity parameters "
                             f"but the data cover only {len(levels)} distinct dilution(s) k/d "
                             f"({shown}); add pool sizes or positives, fix se_max at 1 "
                             '(`fixed["se_max"]`), or use the constant or table model', source)
    objective = CellLikelihood(fam, space, cells)
    if starts is None:
        starts = [space.free_from_natural({**s, **space.fixed})
                  for s in fam.starts(cells.k, cells.d, cells.trials, cells.detected)]
    optimum = maximize(objective, starts, space.bounds, jac=True, fisher=objective.fisher,
                       local=objective.local)
    if not np.isfinite(optimum.loglik):
        raise InputError(f"no {fam.name} sensitivity with the fixed values "
                         f"({', '.join(f'{k}={v:g}' for k, v in space.fixed.items())}) can explain "
                         "the readouts (a sensitivity of 1 with missed detections?)", source)
    return SensitivityFit(fam, space, cells, objective, optimum, list(starts))


def natural_interval(param, lower_u, upper_u, lower_open, upper_open):
    """Map an interval on the unconstrained scale back; open ends become the natural limit."""
    if param.scale == "logit":
        lo = 0.0 if lower_open else float(param.natural(lower_u))
        hi = 1.0 if upper_open else float(param.natural(upper_u))
    else:
        lo = 0.0 if lower_open else float(param.natural(lower_u))
        hi = np.inf if upper_open else float(param.natural(upper_u))
    return lo, hi


class LocalOptimum(Exception):
    """A profile met a point of higher likelihood than the reported optimum."""

    def __init__(self, u):
        super().__init__("the optimum was local")
        self.u = u


def sensitivity_intervals(fit: SensitivityFit, method: str = "profile", level: float = 0.95):
    """Per free parameter: (lower, upper) natural limits, plus notes about open ends. Raises
    LocalOptimum when a profile finds a better fit than the optimum."""
    if method not in INTERVALS:
        raise InputError(f"unknown interval method {method!r} (choose one of "
                         f"{', '.join(INTERVALS)})")
    opt, space = fit.optimum, fit.space
    held = opt.at_lower | opt.at_upper
    info = fit.information()
    se = np.full(space.n_free, np.inf)
    cov = covariance(info, held)
    inside = ~held
    if inside.any():
        se[inside] = standard_errors(info[np.ix_(inside, inside)])
    out, notes = {}, []
    if method == "profile":
        profiler = Profiler(fit.objective, opt, space.bounds, jac=True, level=level, scale=se,
                            local=fit.objective.local, restarts=fit.starts[:1])
    for j, p in enumerate(space.free_params):
        if method == "profile":
            prof = profiler.interval(j)
            if prof.better is not None:
                raise LocalOptimum(prof.better)
            lo_u, hi_u, lo_open, hi_open = prof.lower, prof.upper, prof.lower_open, prof.upper_open
        else:
            lo_u, hi_u = wald_interval(opt.u[j], se[j], level)
            lo_open = held[j] and opt.at_lower[j] or not np.isfinite(lo_u) or lo_u <= p.lower
            hi_open = held[j] and opt.at_upper[j] or not np.isfinite(hi_u) or hi_u >= p.upper
        out[p.name] = natural_interval(p, lo_u, hi_u, lo_open, hi_open)
        if p.scale == "log" and hi_open:
            notes.append(f"the data put no upper limit on {p.name}")
    return out, notes, cov


def edge_warnings(params, at_lower, at_upper, family_name: str, latent: bool = False,
                  written: dict | None = None) -> list:
    """Plain-language warnings for estimates on the edge of the parameter space.

    ``written`` maps a parameter moved inside its range (boundary.py) to the value written."""
    out = []
    written = written or {}
    for p, lo, hi in zip(params, at_lower, at_upper):
        if not (lo or hi):
            continue
        edge = "0" if lo else "1"
        if p.name in written:
            covers = "" if latent else (f" ({'no' if lo else 'every'} readout it covers was "
                                        "positive)")
            out.append(f"{p.name} is estimated at {edge}{covers}; the data do not show that "
                       f"certainty, so the assay file gets {written[p.name]:.6g}, the "
                       f"{boundary.RULE_SENSITIVITY} (the maximum-likelihood value stays in "
                       "[fit])")
            continue
        if p.name == "specificity":
            if hi:
                out.append("the specificity is estimated at 1, so decode treats every positive "
                           "readout as proof of a positive member (fix a value with "
                           f"{_fix('specificity')} if that is too strong)")
            else:
                out.append("the specificity is estimated at 0")
        elif p.name == "prevalence":
            out.append(f"the prevalence is estimated at {edge}")
        elif p.scale == "logit":
            covers = "" if latent else (f": {'no' if lo else 'every'} readout it covers was "
                                        "positive")
            text = f"{p.name} is estimated at {edge}, the edge of its range{covers}"
            if family_name in ("constant", "table"):
                text += ("; decode then treats a " + ("positive" if lo else "negative")
                         + " readout of such a pool as ruling those positives out (fix a value "
                         f"with {_fix(p.name)} if that is too strong)")
            out.append(text)
        elif p.name == "r50":
            out.append("r50 ran to the edge of its range: "
                       + ("sensitivity shows no fall within the dilutions seen; the constant "
                          "model may describe the data as well" if hi else
                          "sensitivity is already low at the smallest dilution seen"))
        elif p.name == "slope":
            out.append("the slope ran to the edge of its range: "
                       + ("the fall of sensitivity is abrupt between two dilutions and its "
                          "steepness is not determined" if hi else
                          "the data show almost no change of sensitivity with dilution"))
    return out


def specificity_estimate(data: ValidationData, fixed, level: float):
    """(estimate, lower, upper, method, log-likelihood contribution, fitted?)."""
    n0, neg0 = data.specificity_counts()
    if fixed is not None:
        sp = float(fixed)
        if not 0.0 < sp <= 1.0:
            raise InputError(f"specificity = {fixed!r} must be in (0, 1]")
        ll = float(xlogy(neg0, sp) + xlogy(n0 - neg0, 1.0 - sp))
        if not np.isfinite(ll):
            raise InputError(f"specificity fixed at {sp:g}, but {n0 - neg0} readout(s) of pools "
                             "without a positive member read positive", data.source)
        return sp, sp, sp, "fixed", ll, False
    if n0 == 0:
        raise InputError("the validation data have no readouts of pools without a positive member "
                         "(positives = 0), so the specificity cannot be estimated; add such rows "
                         'or give it as fixed["specificity"]', data.source,
                         parameters=('fixed["specificity"]',))
    sp = neg0 / n0
    lo, hi = clopper_pearson(neg0, n0, level)
    ll = float(xlogy(neg0, sp) + xlogy(n0 - neg0, 1.0 - sp))
    return sp, float(lo), float(hi), "exact", ll, True


def compare_families(cells: Cells, fixed: dict, base_ll: float, base_params: int,
                     families=FAMILIES, source=None) -> pd.DataFrame:
    """Maximum-likelihood fit of each family and its AIC (Akaike 1974, IEEE Transactions on
    Automatic Control 19(6)); families that cannot be fitted to these data are listed with why."""
    rows = []
    for name in families:
        own = {k: v for k, v in fixed.items() if k in [p.name for p in
                                                       _family_for(name, cells).params()]}
        try:
            fit = fit_sensitivity(cells, name, own, source=source)
        except InputError as exc:
            rows.append({"model": name, "log_likelihood": np.nan, "n_params": 0,
                         "aic": np.nan, "note": exc.message})
            continue
        k = base_params + fit.space.n_free
        ll = base_ll + fit.loglik
        rows.append({"model": name, "log_likelihood": ll, "n_params": k,
                     "aic": 2 * k - 2 * ll, "note": ""})
    frame = pd.DataFrame(rows)
    finite = np.isfinite(frame["aic"])
    best = frame.loc[finite, "aic"].min() if finite.any() else np.nan
    frame["delta_aic"] = frame["aic"] - best
    frame["chosen"] = False
    return frame[["model", "log_likelihood", "n_params", "aic", "delta_aic", "chosen", "note"]]


def calibrate_validation(data: ValidationData, model: str = "best", fixed: dict | None = None,
                         level: float = 0.95, intervals: str = "profile", gof_draws: int = 0,
                         seed=None, compare: bool = True) -> Calibration:
    """Fit specificity and a sensitivity family to validation readouts with known truth.

    ``model`` is ``constant``, ``dilution``, ``table`` or ``best`` (smallest AIC). ``fixed`` holds
    parameters kept at given values (e.g. ``{"se_max": 1.0}`` or ``{"specificity": 0.995}``).
    ``intervals`` is ``profile`` (likelihood ratio) or ``wald`` (on the logit/log scale); the
    specificity always has the exact Clopper-Pearson interval. ``gof_draws`` > 0 adds a parametric
    bootstrap p-value to the goodness-of-fit test. ``compare`` fits the other families too and
    lists their AIC (always done for ``best``).
    """
    level = check_options(model, level, intervals)
    gof_draws = check_count(gof_draws, "gof_draws", 0)
    rng = check_seed(seed)
    fixed = dict(fixed or {})
    sp_fixed = fixed.pop("specificity", None)
    warnings = list(data.notes)
    sp, sp_lo, sp_hi, sp_method, ll_sp, sp_free = specificity_estimate(data, sp_fixed, level)
    cells_all = data.cells()
    cells = cells_all.select(cells_all.d > 0)
    if len(cells) == 0:
        raise InputError("the validation data have no readouts of pools with a positive member "
                         "(positives >= 1), so the sensitivity cannot be estimated", data.source)

    candidates = FAMILIES if model == "best" else (model,)
    params = [p for m in candidates for p in _family_for(m, cells).params()]
    check_fixed(fixed, params, model, ["specificity"] + sorted({p.name for p in params}))
    comparison = None
    if compare or model == "best":
        comparison = compare_families(cells, fixed, ll_sp, int(sp_free), source=data.source)
    chosen = model
    if model == "best":
        ok = comparison[np.isfinite(comparison["aic"])]
        if not len(ok):
            raise InputError("no sensitivity family can be fitted to these data: "
                             + "; ".join(comparison["note"]), data.source)
        chosen = str(ok.sort_values("aic", kind="stable").iloc[0]["model"])
    if comparison is not None:
        comparison.loc[comparison["model"] == chosen, "chosen"] = True
    own = {p.name for p in _family_for(chosen, cells).params()}
    sens_fixed = {k: v for k, v in fixed.items() if k in own}
    fit = fit_sensitivity(cells, chosen, sens_fixed, source=data.source)

    for _ in range(3):
        try:
            limits, notes, cov = sensitivity_intervals(fit, intervals, level)
            break
        except LocalOptimum as exc:  # refit from the better point the profile found
            fit = fit_sensitivity(cells, chosen, sens_fixed, source=data.source,
                                  starts=[exc.u] + fit.starts)
    else:
        raise InputError("the sensitivity fit keeps finding better optima while profiling; the "
                         "likelihood is too irregular for intervals (try intervals wald)",
                         parameters=("intervals",))
    u_written, moved = boundary.sensitivity_inside(fit)
    written = fit.space.natural(u_written)
    warnings += edge_warnings(fit.space.free_params, fit.optimum.at_lower, fit.optimum.at_upper,
                              fit.family.name,
                              written={name: written[name] for name in moved}) + notes
    sp_written = sp
    if sp_free and sp in (0.0, 1.0):
        n0, neg0 = data.specificity_counts()
        sp_written = boundary.specificity_inside(neg0, n0)
        warnings.append(f"{'no false positive' if sp == 1.0 else 'no negative readout'} in "
                        f"{n0} readouts of pools without a positive member: the "
                        f"maximum-likelihood specificity is {sp:g}, which the data do not show "
                        f"with certainty, so the assay file gets {sp_written:.6g}, the "
                        f"{boundary.RULE_SPECIFICITY} (the {100 * level:g}% interval is "
                        f"{sp_lo:.4g} to {sp_hi:.4g}; fix a value with "
                        f"{_fix('specificity')} to choose another)")
    if fit.family.name == "table":
        warnings += _table_gaps(fit)

    values = fit.values
    rows = [{"parameter": "specificity", "estimate": sp, "lower": sp_lo, "upper": sp_hi,
             "interval": INTERVAL_NAMES[sp_method], "fixed": not sp_free, "written": sp_written,
             "rule": boundary.RULE_SPECIFICITY if sp_written != sp else ""}]
    for p in fit.space.params:
        if p.name in fit.space.fixed:
            v = fit.space.fixed[p.name]
            rows.append({"parameter": p.name, "estimate": v, "lower": v, "upper": v,
                         "interval": "fixed", "fixed": True, "written": v, "rule": ""})
        else:
            lo, hi = limits[p.name]
            rows.append({"parameter": p.name, "estimate": values[p.name], "lower": lo, "upper": hi,
                         "interval": INTERVAL_NAMES[intervals], "fixed": False,
                         "written": written[p.name],
                         "rule": boundary.RULE_SENSITIVITY if p.name in moved else ""})
    parameters = pd.DataFrame(rows)

    fitted = np.where(cells_all.d > 0, fit.fitted(cells_all.k, np.maximum(cells_all.d, 1)),
                      1.0 - sp)
    n_params = int(sp_free) + fit.space.n_free
    goodness = goodness_of_fit(cells_all, fitted, n_params)
    if gof_draws and goodness["df"] > 0:
        zero = cells_all.d == 0

        def refit(x):
            out = np.empty(len(x))
            if zero.any():
                sp_star = 1.0 - x[zero].sum() / cells_all.trials[zero].sum() if sp_free else sp
                out[zero] = 1.0 - sp_star
            out[~zero] = fit.refit(x[~zero]).fitted(cells.k, cells.d)
            return out
        goodness["bootstrap_p_value"] = bootstrap_p_value(cells_all, fitted, goodness["deviance"],
                                                          refit, gof_draws, rng)
        goodness["bootstrap_draws"] = int(gof_draws)
    loglik = ll_sp + fit.loglik
    assay = Assay(sp_written, fit.family.sensitivity(written))
    frame = cell_frame(cells_all, fitted, level)
    curve = None
    if fit.family.name in ("constant", "dilution"):
        curve = CurveModel(fit.family, fit.space, fit.optimum.u, cov)
    result = Calibration("validation", chosen, assay, parameters, frame, loglik, n_params,
                         data.n_rows, level, intervals, goodness, comparison, warnings,
                         {"validation": data.source}, curve_model=curve,
                         extra={"rows_skipped": data.skipped} if data.skipped else {})
    names = [("logit " if p.scale == "logit" else "log ") + p.name for p in fit.space.free_params]
    result.covariance = pd.DataFrame(cov, index=names, columns=names)
    details = fit_details(result)
    details["uncertainty"] = boundary.spread(
        fit, u_written, data.specificity_counts()[::-1] if sp_free else None)
    result.assay = Assay(sp_written, assay.sensitivity, details)
    return result


def _table_gaps(fit: SensitivityFit) -> list[str]:
    out = []
    by_size: dict[int, list[int]] = {}
    for k, d in fit.family.entries:
        by_size.setdefault(k, []).append(d)
    for k, ds in sorted(by_size.items()):
        if min(ds) > 1:
            out.append(f"pool size {k} has no validation readouts with 1 positive: its entry for "
                       f"{min(ds)} positives is used from 1 positive up (an optimistic guess)")
    return out


def fit_details(result: Calibration) -> dict:
    """The ``[fit]`` table written into the assay file (decoders ignore it)."""
    import datetime

    from .. import __version__
    out = {"method": result.kind, "model": result.model,
           "date": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
           "bayespool": __version__, "readouts_used": int(result.n_readouts),
           "log_likelihood": float(result.log_likelihood), "parameters": int(result.n_params),
           "aic": float(result.aic), "level": float(result.level),
           "intervals": INTERVAL_NAMES.get(result.interval_method, result.interval_method)}
    for name, path in result.sources.items():
        if path:
            out[f"source_{name}"] = str(path)
    if result.identifiable is not None:
        out["identified"] = bool(result.identifiable)
    for key, value in result.extra.items():
        if isinstance(value, (int, float, str, bool)) and not isinstance(value, np.generic):
            out[key] = value
        elif isinstance(value, np.generic):
            out[key] = value.item()
    table = {}
    for row in result.parameters.itertuples(index=False):
        entry = {"estimate": float(row.estimate), "lower": float(row.lower),
                 "upper": float(row.upper), "interval": str(row.interval)}
        if getattr(row, "rule", ""):  # moved off the edge: the value in the file, and why
            entry["written"] = float(row.written)
            entry["rule"] = str(row.rule)
        table[str(row.parameter)] = entry
    out["estimates"] = table
    if result.goodness is not None:
        out["goodness_of_fit"] = {k: v for k, v in result.goodness.items() if v is not None}
    if result.warnings:
        out["warnings"] = list(result.warnings)
    return out
