"""The result of a calibration: the fitted assay, parameter intervals, cells and fit statistics.

A :class:`Calibration` is data. ``assay`` is what ``bayespool decode`` and ``plan`` read (its
``details`` become the ``[fit]`` table of the assay file); ``to_frame()`` is the parameter table;
``cells`` compares observed and fitted detection rates; ``summary()`` is the dictionary behind
``--json`` and the report; ``str()`` the printed summary.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..assay import Assay
from ..errors import InputError
from ..result_protocol import Result

LABELS = {"validation": "validation runs with known truth",
          "runs": "past runs with latent truth"}


def _clean(value):
    """JSON-ready: numpy scalars to Python, non-finite floats to None."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.bool_):
        return bool(value)
    return value


@dataclass(eq=False, repr=False)
class Calibration(Result):
    """A fitted assay with the evidence behind it.

    ``kind`` is ``"validation"`` (known truth) or ``"runs"`` (latent truth). ``parameters`` has one
    row per parameter: estimate, lower, upper (at ``level``), the interval method and whether the
    value was fixed. ``cells`` has one row per (pool size, positives) cell for validation fits (per
    pool size for runs). ``comparison`` lists the families tried with their AIC. ``covariance``
    is the large-sample covariance of the free parameters on their unconstrained scale (logit of
    probabilities, log of r50 and slope), from the inverse information.

    References
    ----------
    Akaike (1974), IEEE Trans. Automat. Control 19 (AIC); Clopper & Pearson (1934), Biometrika 26;
    Hui & Walter (1980), Biometrics 36.

    Examples
    --------
    >>> import bayespool
    >>> fit = bayespool.calibrate("datasets/demo/invented_validation.csv", model="constant")
    >>> fit.to_frame().index.tolist(), fit.summary()["model"]
    (['specificity', 'sensitivity'], 'constant')
    """

    kind: str
    model: str
    assay: Assay
    parameters: pd.DataFrame
    cells: pd.DataFrame
    log_likelihood: float
    n_params: int
    n_readouts: int
    level: float = 0.95
    interval_method: str = "profile"
    goodness: dict | None = None
    comparison: pd.DataFrame | None = None
    warnings: list = field(default_factory=list)
    sources: dict = field(default_factory=dict)
    identifiable: bool | None = None
    covariance: pd.DataFrame | None = None  # of the free parameters on the unconstrained scale
    extra: dict = field(default_factory=dict)
    curve_model: object = None  # draws sensitivity curves with their uncertainty (plot, report)
    unidentified: str = ""  # why the fit is not identified and what to do ("" when it is)

    def check_identified(self) -> None:
        """Raise :class:`InputError` with the reason and the remedy when the data do not identify
        the fit (Hui & Walter 1980): such a fit must not silently become the assay."""
        if self.identifiable is False:
            raise InputError(self.unidentified or "the data do not identify the fit")

    @property
    def aic(self) -> float:
        """Akaike's information criterion, 2 p - 2 log L (Akaike 1974)."""
        return 2.0 * self.n_params - 2.0 * self.log_likelihood

    def estimate(self, name: str) -> float:
        return float(self.parameters.set_index("parameter").loc[name, "estimate"])

    def interval(self, name: str) -> tuple[float, float]:
        row = self.parameters.set_index("parameter").loc[name]
        return float(row["lower"]), float(row["upper"])

    def to_frame(self) -> pd.DataFrame:
        """The parameter table indexed by ``parameter``: estimate, lower, upper, interval, fixed."""
        return self.parameters.set_index("parameter")

    def sensitivity_curve(self, dilution, draws: int = 2000, seed: int = 0):
        """Fitted Se against dilution k/d with a pointwise band at ``level`` (DataFrame)."""
        if self.curve_model is None:
            raise ValueError("this calibration has no sensitivity curve")
        return self.curve_model.curve(np.asarray(dilution, dtype=float), self.level, draws, seed)

    def summary(self) -> dict:
        """A JSON-ready summary (non-finite numbers become null)."""
        params = {}
        for row in self.parameters.itertuples(index=False):
            params[row.parameter] = {"estimate": row.estimate, "lower": row.lower,
                                     "upper": row.upper, "interval": row.interval,
                                     "fixed": bool(row.fixed)}
            if getattr(row, "rule", ""):  # on the edge: the value written instead, and why
                params[row.parameter].update(written=row.written, rule=row.rule)
        out = {"kind": self.kind, "model": self.model, "assay": self.assay.to_dict(),
               "parameters": params, "level": self.level,
               "log_likelihood": self.log_likelihood, "n_params": self.n_params,
               "aic": self.aic, "readouts": self.n_readouts, "sources": dict(self.sources)}
        out["assay"].pop("fit", None)
        if self.goodness is not None:
            out["goodness_of_fit"] = dict(self.goodness)
        if self.comparison is not None:
            out["comparison"] = self.comparison.to_dict(orient="records")
        if self.identifiable is not None:
            out["identifiable"] = self.identifiable
        out.update(self.extra)
        out["warnings"] = list(self.warnings)
        return _clean(out)

    def _brief(self) -> str:
        return (f"{self.kind}, model={self.model!r}, {self.n_readouts} readouts, "
                f"log_likelihood={self.log_likelihood:.4f}")

    def __str__(self) -> str:
        """The printed summary."""
        pct = f"{100 * self.level:g}%"
        lines = [f"calibration from {LABELS.get(self.kind, self.kind)}: {self.model} model, "
                 f"{self.n_readouts} readouts", f"  assay: {self.assay.describe()}",
                 f"  {'parameter':<14} {'estimate':>10}   {pct} interval"]
        for row in self.parameters.itertuples(index=False):
            how = "fixed" if row.fixed else row.interval
            lines.append(f"  {row.parameter:<14} {_fmt(row.estimate):>10}   "
                         f"[{_fmt(row.lower)}, {_fmt(row.upper)}]  ({how})")
            if getattr(row, "rule", ""):
                lines.append(f"  {'':<14} written as {row.written:.6g}: {row.rule}")
        lines.append(f"  log-likelihood {self.log_likelihood:.4f}, {self.n_params} fitted "
                     f"parameters, AIC {self.aic:.3f}")
        g = self.goodness
        if g is not None:
            if g["df"] > 0:
                boot = (f", bootstrap p = {g['bootstrap_p_value']:.3g}"
                        if g.get("bootstrap_p_value") is not None else "")
                lines.append(f"  goodness of fit over {g['cells']} cells: deviance "
                             f"{g['deviance']:.3f} on {g['df']} df (p = {g['deviance_p_value']:.3g}),"
                             f" Pearson {g['pearson']:.3f} (p = {g['pearson_p_value']:.3g}){boot}")
            else:
                lines.append(f"  goodness of fit: none ({g['cells']} cells, {g['parameters']} "
                             "parameters: the model is saturated)")
        if self.comparison is not None and len(self.comparison) > 1:
            lines.append("  families by AIC:")
            for row in self.comparison.itertuples(index=False):
                mark = " <- chosen" if row.chosen else ""
                if np.isfinite(row.aic):
                    lines.append(f"    {row.model:<9} AIC {row.aic:10.3f}  (delta {row.delta_aic:.3f},"
                                 f" {row.n_params} parameters){mark}")
                else:
                    lines.append(f"    {row.model:<9} not fitted: {row.note}")
        for name, value in self.extra.items():
            if isinstance(value, (int, float, str)):
                lines.append(f"  {name.replace('_', ' ')}: {value}")
        for w in self.warnings:
            lines.append(f"  warning: {w}")
        return "\n".join(lines)


def _fmt(v) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "-"
    if isinstance(v, float) and math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return f"{float(v):.4g}"
