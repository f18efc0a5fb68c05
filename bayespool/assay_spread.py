"""An assay whose parameters are uncertain: readout likelihoods averaged over the fit's spread.

``calibrate`` writes the distribution of the fitted parameters into the assay file's
``[fit.uncertainty]`` table (see ``bayespool/calibration/boundary.py``): the specificity's Jeffreys
posterior Beta(a, b) and a normal distribution of the sensitivity parameters on their logit/log
scale. :func:`integrate` turns such an assay into an :class:`IntegratedAssay`, whose per-pool
likelihood vectors are averaged over that distribution:

    L_t[0] = E[Sp^n_neg (1 - Sp)^n_pos]   (exact: a ratio of Beta functions)
    L_t[d] = E[Se(k, d)^n_pos (1 - Se(k, d))^n_neg], d >= 1   (mean over the file's posterior draws)

Every decoder and the planner take it in place of the assay. It is an approximation, and says where:
each pool's readouts are averaged over the assay on their own, as if every pool had its own draw of
the parameters, so it forgets that all pools share one assay (what one pool's readouts say about the
assay does not carry over to the others). For a positive pool it gives the answer a certainty would
hide: with Sp fitted from n clean controls, a lone positive pool keeps a false-positive chance of
about E[1 - Sp] = 0.5 / (n + 1) instead of 0.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
from scipy.special import betaln, expit, logsumexp, xlogy

from .assay import Assay, sensitivity_from_dict
from .errors import InputError

_TABLE_NAME = re.compile(r"se\[(\d+),(\d+)\]")


@dataclass(frozen=True)
class IntegratedAssay(Assay):
    """The assay's likelihoods averaged over its fitted uncertainty (see the module docstring)."""

    spec_beta: tuple | None = None     # (a, b) of the specificity, None when it was fixed
    sens_draws: tuple = ()             # Sensitivity objects drawn from the fit

    def positive_probability(self, k, d) -> np.ndarray:
        """Predictive P(positive readout | k, d): the mean over the assay's uncertainty."""
        k, d = np.broadcast_arrays(np.asarray(k), np.asarray(d))
        out = np.full(k.shape, self._false_positive_mean())
        pos = d > 0
        if pos.any():
            out[pos] = np.mean([s(k[pos], d[pos]) for s in self._sensitivities()], axis=0)
        return out

    def log_likelihood(self, pool_size, n_positive, n_negative):
        """Flat per-pool log L_t[d] averaged over the assay's uncertainty (same layout as Assay)."""
        k = np.asarray(pool_size, dtype=np.int64)
        npos = np.asarray(n_positive, dtype=float)
        nneg = np.asarray(n_negative, dtype=float)
        ptr = np.zeros(len(k) + 1, dtype=np.int64)
        np.cumsum(k + 1, out=ptr[1:])
        owner = np.repeat(np.arange(len(k)), k + 1)
        d = np.arange(int(ptr[-1]), dtype=np.int64) - ptr[owner]
        values = np.empty(len(d))
        zero = d == 0
        if self.spec_beta is None:
            sp = self.specificity
            values[zero] = xlogy(nneg, sp) + xlogy(npos, 1.0 - sp)
        else:
            a, b = self.spec_beta
            values[zero] = betaln(a + nneg, b + npos) - betaln(a, b)
        pos = ~zero
        if pos.any():
            # entries sharing (k, d, positives, negatives) share a value: compute each once
            keys = np.stack([k[owner[pos]], d[pos], npos[owner[pos]], nneg[owner[pos]]], axis=1)
            uniq, back = np.unique(keys, axis=0, return_inverse=True)
            uk, ud = uniq[:, 0].astype(np.int64), uniq[:, 1].astype(np.int64)
            per_draw = np.empty((len(self._sensitivities()), len(uniq)))
            for m, sens in enumerate(self._sensitivities()):
                se = np.asarray(sens(uk, ud), dtype=float)
                per_draw[m] = xlogy(uniq[:, 2], se) + xlogy(uniq[:, 3], 1.0 - se)
            with np.errstate(divide="ignore"):
                avg = logsumexp(per_draw, axis=0) - np.log(len(per_draw))
            values[pos] = avg[np.ravel(back)]
        return ptr, values

    def describe(self) -> str:
        return (super().describe() + ", integrated over the fit's uncertainty (per-pool average: "
                "an approximation that treats each pool's assay as a separate draw)")

    def _false_positive_mean(self) -> float:
        if self.spec_beta is None:
            return 1.0 - self.specificity
        a, b = self.spec_beta
        return b / (a + b)

    def _sensitivities(self):
        return self.sens_draws or (self.sensitivity,)


def integrate(assay: Assay, source: str | None = None) -> IntegratedAssay:
    """The assay averaged over the uncertainty its ``[fit.uncertainty]`` table describes.

    Raises InputError when the assay carries no such table (a hand-written assay file, or one
    calibrated before the table existed): recalibrate, or decode without the option.
    """
    spread = (assay.details or {}).get("uncertainty")
    if not isinstance(spread, dict):
        raise InputError("the assay has no [fit.uncertainty] table, so there is no fitted "
                         "uncertainty to integrate over; write the assay file with "
                         "bayespool calibrate, or leave out `assay_uncertainty`", source)
    spec = spread.get("specificity_beta")
    spec_beta = None
    if spec is not None:
        a, b = (float(v) for v in spec)
        if not (a > 0 and b > 0):
            raise InputError(f"[fit.uncertainty] specificity_beta = {spec!r}: both parameters "
                             "must be positive", source)
        spec_beta = (a, b)
    return IntegratedAssay(assay.specificity, assay.sensitivity, assay.details,
                           getattr(assay, "results", {}), spec_beta=spec_beta,
                           sens_draws=tuple(_sensitivity_draws(assay, spread, source)))


def _sensitivity_draws(assay: Assay, spread: dict, source) -> list:
    names = list(spread.get("sensitivity_parameters") or [])
    if not names:
        return []
    scales = list(spread.get("sensitivity_scales") or [])
    try:
        sims = np.asarray(spread.get("sensitivity_draws"), dtype=float)
    except (TypeError, ValueError):
        sims = np.zeros((0, 0))
    if len(scales) != len(names) or sims.ndim != 2 or sims.shape[1] != len(names) or \
            not len(sims) or not np.isfinite(sims).all():
        raise InputError("[fit.uncertainty] sensitivity_parameters, sensitivity_scales and "
                         "sensitivity_draws do not agree (one row of finite values per draw, "
                         "one value per parameter)", source)
    base = assay.sensitivity.to_dict()
    out = []
    for row in sims:
        table = {key: (list(map(dict, value)) if key == "table" else value)
                 for key, value in base.items()}
        for name, scale, u in zip(names, scales, row):
            value = float(expit(u)) if scale == "logit" else float(np.exp(u))
            _set(table, name, value, source)
        out.append(sensitivity_from_dict(table, source))
    return out


def _set(table: dict, name: str, value: float, source) -> None:
    """Put a drawn parameter into the sensitivity table (``se[k,d]`` names a table entry)."""
    match = _TABLE_NAME.fullmatch(name)
    if match is None:
        if name == "sensitivity" and table.get("model") == "constant":
            name = "value"  # the constant family's one parameter
        if name not in table:
            raise InputError(f"[fit.uncertainty] names {name!r}, which the sensitivity model "
                             "does not have", source)
        table[name] = value
        return
    k, d = int(match.group(1)), int(match.group(2))
    for entry in table.get("table", []):
        if int(entry["pool_size"]) == k and int(entry["positives"]) == d:
            entry["value"] = value
            return
    raise InputError(f"[fit.uncertainty] names {name!r}, which the sensitivity table does not "
                     "have", source)
