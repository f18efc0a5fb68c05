"""Fitting the assay and the prevalence jointly from past routine runs, where truth is latent.

Past runs hold pools and the follow-up tests of their members (individual tests are pools of one,
read by the same imperfect assay). With statuses x_i ~ Bernoulli(prevalence) independently, the
likelihood of the readouts is the evidence log P(y | theta) = sum_c log Z_c(theta) over connected
components (evidence.py: pools with their follow-up in closed form, the rest by the exact
decoder's enumeration, bayespool.decoders.exact). It is maximised directly
over (prevalence, specificity, sensitivity parameters) on the unconstrained scale with scipy's
SLSQP: the same estimate as EM with the exact posterior as E-step (Dempster, Laird & Rubin 1977)
reaches at its fixed point, without EM's slow final convergence, and the curvature of the same
function gives the observed information for intervals.

Latent-class fits are not always identifiable: when the data can be explained equally well by
trading sensitivity against prevalence the fit says so (Hui & Walter 1980, Estimating the error
rates of diagnostic tests, Biometrics 36(1)), see identify.py.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..assay import Assay
from ..errors import InputError
from ..run import Run
from .evidence import Evidence
from .curve import CurveModel, covariance
from .families import FAMILIES, Family, Param, check_fixed, family, probability
from .fit import (INTERVAL_NAMES, LocalOptimum, check_options, edge_warnings,
                  fit_details, natural_interval)
from .identify import identifiability
from .intervals import clopper_pearson
from .mle import Profiler, hessian, maximize, standard_errors, wald_interval
from .result import Calibration
from .space import Space

PENALTY = 1e12  # value returned where the assay makes the readouts impossible


class RunLikelihood:
    """Negative log marginal likelihood of a run's readouts as a function of the free parameters."""

    def __init__(self, run: Run, fam: Family, space: Space, evidence: Evidence | None = None):
        self.run, self.family, self.space = run, fam, space
        self.evidence = Evidence(run) if evidence is None else evidence
        self.evaluations = 0

    def assay(self, values: dict) -> Assay:
        return Assay(values["specificity"], self.family.sensitivity(values))

    def loglik_at(self, values: dict) -> float:
        return self.evidence.loglik(self.assay(values), values["prevalence"])

    def __call__(self, u_free) -> float:
        self.evaluations += 1
        value = -self.loglik_at(self.space.natural(u_free))
        return value if np.isfinite(value) else PENALTY


def _params(fam: Family) -> list[Param]:
    return [probability("prevalence"), probability("specificity")] + fam.params()


def _family_for_run(model: str, run: Run, read: np.ndarray) -> Family:
    if model == "table":
        sizes = sorted(set(run.pool_size[read].tolist()))
        return family("table", [(k, 1) for k in sizes])
    return family(model)


def _starts(run: Run, fam: Family, read: np.ndarray) -> list[dict]:
    """A few starting points: prevalence from the individual tests (or the pools), a good assay."""
    k = run.pool_size[read]
    pos = (run.n_positive[read] > 0).astype(float)
    single = k == 1
    if single.any():
        prev = float((pos[single].sum() + 0.5) / (single.sum() + 1.0))
    else:
        rate = float((pos.sum() + 0.5) / (len(pos) + 1.0))
        prev = 1.0 - (1.0 - min(rate, 0.9)) ** (1.0 / max(float(np.mean(k)), 1.0))
    prev = float(np.clip(prev, 1e-3, 0.5))
    out = []
    for se, sp in ((0.9, 0.99), (0.98, 0.999), (0.75, 0.97)):
        base = {"prevalence": prev, "specificity": sp}
        if fam.name == "constant":
            base["sensitivity"] = se
        elif fam.name == "dilution":
            base.update({"se_max": se, "r50": float(4.0 * k.max()), "slope": 1.0})
        else:
            base.update({p.name: se for p in fam.params()})
        out.append(base)
    return out


def _pool_size_cells(run: Run, read: np.ndarray, level: float) -> pd.DataFrame:
    """Observed positive-readout rates per pool size (the truth is latent: no fitted column)."""
    frame = pd.DataFrame({"pool_size": run.pool_size[read], "npos": run.n_positive[read],
                          "nneg": run.n_negative[read]})
    g = frame.groupby("pool_size").agg(pools=("npos", "size"), positive_readouts=("npos", "sum"),
                                       negative_readouts=("nneg", "sum")).reset_index()
    g["readouts"] = g["positive_readouts"] + g["negative_readouts"]
    lo, hi = clopper_pearson(g["positive_readouts"], g["readouts"], level)
    g["observed_rate"] = g["positive_readouts"] / g["readouts"]
    g["observed_lower"], g["observed_upper"] = lo, hi
    return g[["pool_size", "pools", "readouts", "positive_readouts", "observed_rate",
              "observed_lower", "observed_upper"]]


def calibrate_runs(run: Run, model: str = "best", fixed: dict | None = None,
                   level: float = 0.95, intervals: str = "profile") -> Calibration:
    """Fit prevalence, specificity and a sensitivity family to a past run with latent truth.

    ``model`` is ``constant``, ``dilution``, ``table`` (one sensitivity per pool size) or ``best``
    (smallest AIC). ``fixed`` keeps parameters at given values, e.g. ``{"se_max": 1.0}`` or
    ``{"specificity": 0.998}``, which is how a design that cannot identify everything can still
    be used. A pool with the individual follow-up of its members may be of any size; other
    groups of specimens linked through shared pools must stay within the exact decoder's limit.
    """
    level = check_options(model, level, intervals)
    read = run.pool_read
    if not read.any():
        raise InputError("the readouts hold no readout of any pool: nothing to fit",
                         run.sources.get("readouts"))
    fixed = dict(fixed or {})
    candidates = FAMILIES if model == "best" else (model,)
    check_fixed(fixed, [p for m in candidates for p in _params(_family_for_run(m, run, read))],
                model)
    evidence = Evidence(run)
    if model == "best":
        fits = {name: _fit_run(run, name, fixed, read, evidence) for name in FAMILIES}
        aic = {n: 2 * f[1].n_free - 2 * f[2].loglik for n, f in fits.items()}
        chosen = min(aic, key=aic.get)
        comparison = pd.DataFrame([{"model": n, "log_likelihood": fits[n][2].loglik,
                                    "n_params": fits[n][1].n_free, "aic": a,
                                    "delta_aic": a - aic[chosen], "chosen": n == chosen,
                                    "note": ""} for n, a in aic.items()])
        fam, space, opt, objective = fits[chosen]
    else:
        fam, space, opt, objective = _fit_run(run, model, fixed, read, evidence)
        chosen, comparison = model, None

    for _ in range(3):
        try:
            info, held, limits = _intervals(objective, opt, space, intervals, level)
            break
        except LocalOptimum as exc:  # a profile met a better fit: refit from there
            opt = maximize(objective, [exc.u, opt.u], space.bounds, jac=False)
    else:
        raise InputError("the fit keeps finding better optima while profiling; the likelihood "
                         "is too irregular for intervals (try intervals wald)",
                         parameters=("intervals",))
    values = space.natural(opt.u)
    for p, lo, hi in zip(space.free_params, opt.at_lower, opt.at_upper):
        if p.scale == "logit" and (lo or hi):
            values[p.name] = 0.0 if lo else 1.0
    rows = []
    for p in space.params:
        if p.name in space.fixed:
            v = space.fixed[p.name]
            rows.append({"parameter": p.name, "estimate": v, "lower": v, "upper": v,
                         "interval": "fixed", "fixed": True})
        else:
            lo, hi = limits[p.name]
            rows.append({"parameter": p.name, "estimate": values[p.name], "lower": lo,
                         "upper": hi, "interval": INTERVAL_NAMES[intervals], "fixed": False})
    parameters = pd.DataFrame(rows)

    ident = identifiability(run, read, fam, space, info, held, parameters)
    warnings = list(run.notes)
    if run.samples is not None and "prior" in run.samples.columns:
        warnings.append("the priors of the samples file are not used: calibration fits one "
                        "prevalence for every specimen")
    warnings += edge_warnings(space.free_params, opt.at_lower, opt.at_upper, fam.name, latent=True)
    warnings += ident.warnings
    assay = Assay(values["specificity"], fam.sensitivity(values))
    curve = None
    if fam.name in ("constant", "dilution") and not ident.flat:
        sens_idx = [i for i, p in enumerate(space.free_params) if p.name not in
                    ("prevalence", "specificity")]
        sub_space = Space(fam.params(), {k: v for k, v in space.fixed.items()
                                         if k not in ("prevalence", "specificity")})
        cov = covariance(info, held)[np.ix_(sens_idx, sens_idx)]
        curve = CurveModel(fam, sub_space, opt.u[sens_idx], cov)
    n_read_samples = int(np.unique(run.pool_members[np.repeat(read, run.pool_size)]).size)
    extra = {"pools_read": int(read.sum()), "specimens_read": n_read_samples,
             "individual_tests": int((read & (run.pool_size == 1)).sum())}
    result = Calibration("runs", chosen, assay, parameters, _pool_size_cells(run, read, level),
                         opt.loglik, space.n_free, run.n_readouts, level, intervals, None,
                         comparison, warnings,
                         {k: v for k, v in run.sources.items() if k in ("layout", "readouts",
                                                                       "samples") and v},
                         identifiable=not ident.problem, extra=extra, curve_model=curve)
    if ident.problem:
        result.unidentified = ident.refusal()
    names = [("logit " if p.scale == "logit" else "log ") + p.name for p in space.free_params]
    result.covariance = pd.DataFrame(covariance(info, held), index=names, columns=names)
    result.assay = Assay(assay.specificity, assay.sensitivity, fit_details(result))
    return result


def _intervals(objective, opt, space: Space, intervals: str, level: float):
    """Observed information, parameters held on a bound, and natural limits per free parameter."""
    info = hessian(objective, opt.u, jac=False, step=1e-4) if space.n_free else np.zeros((0, 0))
    held = opt.at_lower | opt.at_upper
    se = np.full(space.n_free, np.inf)
    if (~held).any():
        se[~held] = standard_errors(info[np.ix_(~held, ~held)])
    limits = {}
    if intervals == "profile" and space.n_free:
        profiler = Profiler(objective, opt, space.bounds, jac=False, level=level, scale=se)
    for j, p in enumerate(space.free_params):
        if intervals == "profile":
            prof = profiler.interval(j)
            if prof.better is not None:
                raise LocalOptimum(prof.better)
            limits[p.name] = natural_interval(p, prof.lower, prof.upper, prof.lower_open,
                                              prof.upper_open)
        else:
            lo_u, hi_u = wald_interval(opt.u[j], se[j], level)
            limits[p.name] = natural_interval(p, lo_u, hi_u,
                                              not np.isfinite(lo_u) or lo_u <= p.lower,
                                              not np.isfinite(hi_u) or hi_u >= p.upper)
    return info, held, limits


def _fit_run(run: Run, model: str, fixed, read, evidence: Evidence):
    fam = _family_for_run(model, run, read)
    params = _params(fam)
    own = {p.name for p in params}
    space = Space(params, {k: v for k, v in (fixed or {}).items() if k in own}, None)
    objective = RunLikelihood(run, fam, space, evidence)
    starts = [space.free_from_natural({**s, **space.fixed}) for s in _starts(run, fam, read)]
    opt = maximize(objective, starts, space.bounds, jac=False)
    if opt.loglik <= -PENALTY / 2:
        raise InputError("no parameter values can explain the readouts with the fixed values "
                         f"({', '.join(f'{k}={v:g}' for k, v in space.fixed.items())}): a "
                         "sensitivity or specificity fixed at 1 rules out every status vector",
                         run.sources.get("readouts"))
    return fam, space, opt, objective
