"""Fitting the Ct load model from validation readouts with Cts.

A validation file with a ``ct`` column and an ``individual_ct`` column (the known Ct of the spiked
positive read alone, on rows with one positive) gives:

- cycles_per_doubling s, noise_sd and detection_max by maximum likelihood over the one-positive
  readouts: a readout amplifies with probability detection_max and reads
  y = individual_ct + s log2 k + e, e ~ Normal(0, noise_sd^2), censored at the cutoff (a Tobit-type
  likelihood: no amplification has probability 1 - detection_max Phi((cutoff - mu) / noise_sd)).
  Intervals: Wald on the unconstrained scale (log noise_sd, logit detection_max), from the
  numerical Hessian.
- the individual-Ct mixture from the individual_ct values, normal mixtures of 1 to 3 components by
  EM, the number of components chosen by BIC (Schwarz 1978).
- the specificity from the readouts of pools without a positive member, with the exact
  Clopper-Pearson interval (Clopper & Pearson 1934); false amplifications' smallest Ct sets
  false_positive_low (cutoff - 10 when there is none, with a note).

The individual Ct is taken as known (the issue's ``individual_ct``); a validation file without it
cannot separate the dilution slope from the spread of the loads and is refused.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, stats

from ..errors import InputError
from ..result_protocol import Result

Z95 = stats.norm.ppf(0.975)


@dataclass(eq=False, repr=False)
class CtCalibration(Result):
    """The fitted Ct assay and what the fit knows about itself.

    ``to_frame()`` has one row per parameter (index ``parameter``): estimate, low, high.
    """

    assay: object
    estimates: dict          # name -> (estimate, low, high)
    components: int
    bic: dict                # number of components -> BIC
    readouts: int
    warnings: list = field(default_factory=list)

    def summary(self) -> dict:
        return {"kind": "validation with Ct", "readouts": self.readouts,
                "parameters": {k: {"estimate": v[0], "low": v[1], "high": v[2]}
                               for k, v in self.estimates.items()},
                "mixture_components": self.components,
                "mixture_selection": "BIC", "bic": {str(k): v for k, v in self.bic.items()},
                "assay": self.assay.describe(), "warnings": list(self.warnings)}

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame([(k, *v) for k, v in self.estimates.items()],
                            columns=["parameter", "estimate", "low", "high"]).set_index("parameter")

    def _brief(self) -> str:
        return f"{self.readouts} readouts, {self.components} mixture component(s)"

    def __str__(self) -> str:
        lines = [f"Ct model fitted from {self.readouts} validation readouts (95 % intervals: "
                 "Wald for the load model, Clopper-Pearson for the specificity)"]
        for k, (est, lo, hi) in self.estimates.items():
            lines.append(f"  {k:<22} {est:.4g}  [{lo:.4g}, {hi:.4g}]")
        lines.append(f"  individual-Ct mixture: {self.components} component(s), chosen by BIC "
                     + ", ".join(f"{k}: {v:.1f}" for k, v in self.bic.items()))
        lines += [f"  note: {w}" for w in self.warnings]
        return "\n".join(lines)


def fit_dilution(pool_size, individual_ct, ct, cutoff: float):
    """MLE of (s, noise_sd, detection_max) from one-positive readouts; ``ct`` NaN = no Ct.

    Returns (estimates dict name -> (est, low, high)).
    """
    k = np.asarray(pool_size, float)
    c = np.asarray(individual_ct, float)
    y = np.asarray(ct, float)
    amp = np.isfinite(y) & (y < cutoff)
    lk = np.log2(k)

    def nll(theta):
        s, log_sd, logit_dm = theta
        sd = math.exp(log_sd)
        log_dm = -np.logaddexp(0.0, -logit_dm)
        mu = c + s * lk
        out = np.sum(log_dm + stats.norm.logpdf(y[amp], mu[amp], sd))
        z = (cutoff - mu[~amp]) / sd
        miss = np.log1p(-np.exp(log_dm + stats.norm.logcdf(z)).clip(max=1 - 1e-300))
        return -(out + np.sum(miss))
    resid = y[amp] - c[amp]
    s0 = float(np.sum(resid * lk[amp]) / max(np.sum(lk[amp] ** 2), 1e-9)) if amp.any() else 1.0
    sd0 = float(np.std(resid - s0 * lk[amp])) if amp.sum() > 2 else 0.5
    start = np.array([s0, math.log(max(sd0, 0.05)), 4.0])
    res = optimize.minimize(nll, start, method="Nelder-Mead",
                            options={"xatol": 1e-7, "fatol": 1e-9, "maxiter": 4000})
    theta = res.x
    cov = np.linalg.pinv(_hessian(nll, theta))
    se = np.sqrt(np.clip(np.diag(cov), 0, None))
    s, log_sd, logit_dm = theta
    all_amp = bool(amp.all())

    def expit(v):
        return 1.0 / (1.0 + math.exp(-v))
    out = {"cycles_per_doubling": (s, s - Z95 * se[0], s + Z95 * se[0]),
           "noise_sd": (math.exp(log_sd), math.exp(log_sd - Z95 * se[1]),
                        math.exp(log_sd + Z95 * se[1]))}
    if all_amp:  # every readout amplified: detection_max at its bound, one-sided exact interval
        n = int(amp.sum())
        out["detection_max"] = (1.0, 0.05 ** (1.0 / n), 1.0)
    else:
        out["detection_max"] = (expit(logit_dm), expit(logit_dm - Z95 * se[2]),
                                expit(logit_dm + Z95 * se[2]))
    return out


def _hessian(f, x, h=1e-4):
    n = len(x)
    out = np.empty((n, n))
    for i in range(n):
        for j in range(n):
            e_i = np.eye(n)[i] * h
            e_j = np.eye(n)[j] * h
            out[i, j] = (f(x + e_i + e_j) - f(x + e_i - e_j) - f(x - e_i + e_j)
                         + f(x - e_i - e_j)) / (4 * h * h)
    return out


def fit_mixture(values, max_components: int = 3, seed: int = 0):
    """Normal mixtures of 1..max_components by EM; the one with the smallest BIC.

    Returns (weights, means, sds, bic dict)."""
    x = np.asarray(values, float)
    n = len(x)
    rng = np.random.default_rng(seed)
    best, bics = None, {}
    for j in range(1, max_components + 1):
        if n < 5 * j:
            break
        fits = []
        for _ in range(5):  # a few starts from quantiles with jitter
            q = np.quantile(x, (np.arange(j) + 0.5) / j) + rng.normal(0, 0.1, j)
            w, m, sd = np.full(j, 1.0 / j), q, np.full(j, x.std() / j + 1e-3)
            for _ in range(500):
                logp = np.log(w) + stats.norm.logpdf(x[:, None], m, sd)
                ll_i = np.logaddexp.reduce(logp, axis=1)
                r = np.exp(logp - ll_i[:, None])
                nk = r.sum(axis=0) + 1e-12
                w, m = nk / n, (r * x[:, None]).sum(axis=0) / nk
                sd = np.sqrt((r * (x[:, None] - m) ** 2).sum(axis=0) / nk).clip(min=0.05)
            fits.append((ll_i.sum(), w, m, sd))
        ll, w, m, sd = max(fits, key=lambda f: f[0])
        bic = -2 * ll + (3 * j - 1) * math.log(n)
        bics[j] = float(bic)
        if best is None or bic < best[0]:
            order = np.argsort(m)
            best = (bic, w[order], m[order], sd[order])
    _, w, m, sd = best
    w = w / w.sum()
    return w, m, sd, bics


def calibrate_ct(table, *, cutoff: float = 40.0):
    """Fit the ``[ct]`` assay from a validation table (pool_size, positives, result, ct,
    individual_ct) read by :func:`bayespool.io.read_table`."""
    from ..assay import Assay
    from ..ct import CtModel, CtSensitivity
    from ..run import parse_results
    f = table.frame
    if "individual_ct" not in f.columns:
        raise InputError("a validation file with a ct column needs an individual_ct column (the "
                         "known Ct of the spiked positive read alone) to fit the Ct model",
                         table.path, 1)
    k, given_k = table.numbers("pool_size")
    d, given_d = table.numbers("positives")
    for name, v, g in (("pool_size", k, given_k), ("positives", d, given_d)):
        bad = ~g | ~np.isfinite(v) | (v < (1 if name == "pool_size" else 0)) | (v != np.round(v))
        if bad.any():
            raise table.error(f"{name} must be a whole number", int(np.flatnonzero(bad)[0]), name)
    res = parse_results(table)
    ct, _ = table.numbers("ct")
    ind, ind_given = table.numbers("individual_ct")
    keep = res >= 0
    warnings = []
    neg = keep & (d == 0)
    n_neg = int(neg.sum())
    false_amp = neg & (res == 1)
    x = int(false_amp.sum())
    if n_neg == 0:
        raise InputError("the validation file has no pool without a positive member: the "
                         "specificity cannot be fitted", table.path)
    sp = 1 - x / n_neg
    lo = 1 - stats.beta.ppf(0.975, x + 1, n_neg - x) if x < n_neg else 0.0
    hi = 1 - stats.beta.ppf(0.025, x, n_neg - x + 1) if x > 0 else 1.0
    one = keep & (d == 1) & ind_given & np.isfinite(ind)
    if one.sum() < 10:
        raise InputError(f"only {int(one.sum())} readouts of pools with one positive and a known "
                         "individual_ct: at least 10 are needed to fit the Ct model", table.path)
    y = np.where((res == 1) & np.isfinite(ct), ct, np.nan)
    est = fit_dilution(k[one], ind[one], y[one], cutoff)
    est["specificity"] = (sp, lo, hi)
    fp_cts = ct[false_amp & np.isfinite(ct) & (ct < cutoff)]
    if len(fp_cts):
        fpl = float(np.floor(fp_cts.min()))
    else:
        fpl = cutoff - 10.0
        warnings.append(f"no false amplification has a Ct: false_positive_low set to {fpl:g}")
    w, m, sd, bics = fit_mixture(ind[one])
    model = CtModel(cutoff=cutoff, cycles_per_doubling=float(est["cycles_per_doubling"][0]),
                    noise_sd=float(est["noise_sd"][0]), false_positive_low=fpl,
                    weights=tuple(float(v) for v in w), means=tuple(float(v) for v in m),
                    sds=tuple(float(v) for v in sd),
                    detection_max=float(min(est["detection_max"][0], 1.0)))
    s = est["cycles_per_doubling"]
    if not s[1] <= 1.0 <= s[2]:
        warnings.append(f"cycles_per_doubling {s[0]:.3f} [{s[1]:.3f}, {s[2]:.3f}] excludes 1 "
                        "(100 % amplification efficiency)")
    assay = Assay(float(sp), CtSensitivity(model))
    return CtCalibration(assay, est, len(w), bics, int(keep.sum()), warnings)
