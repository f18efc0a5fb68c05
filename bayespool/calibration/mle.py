"""Maximum likelihood on the unconstrained scale, and confidence intervals for each parameter.

``maximize`` runs scipy.optimize from several starts within wide bounds on the unconstrained scale
(after a fast local fit when the likelihood offers one). ``Profiler.interval`` inverts the
likelihood-ratio test: the interval holds every value whose profile deviance
2 (max log L - max log L given the value) stays below the chi-square(1) quantile (Venzon &
Moolgavkar 1988, A method for computing profile-likelihood-based confidence intervals, Applied
Statistics 37(1)). ``wald_interval`` is estimate +- z * standard error on the unconstrained scale,
mapped back, so it stays in the parameter space.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import optimize
from scipy.stats import chi2, norm

BOUND_TOL = 1e-6  # an estimate this close (unconstrained scale) to a bound sits on it
MAX_STEP = 3.0    # largest move of a profile walk on the unconstrained scale


@dataclass
class Optimum:
    """The maximum found: free parameters (unconstrained), log-likelihood and how it went."""

    u: np.ndarray
    loglik: float
    converged: bool
    at_lower: np.ndarray
    at_upper: np.ndarray
    message: str = ""
    evaluations: int = 0


def maximize(objective, starts, bounds, jac: bool = True, fisher=None, local=None,
             options: dict | None = None) -> Optimum:
    """Minimise the negative log-likelihood ``objective`` from each start; return the best.

    ``objective(u)`` returns the value, or (value, gradient) when ``jac``. With an information
    matrix ``fisher(u)`` and a fast local fit ``local(u) -> (u, value)`` within the bounds, each
    start is fitted locally and the best optimum is confirmed by scipy's trust-region Newton method
    with the information as curvature; otherwise scipy's SLSQP runs within the bounds.
    """
    lo = np.array([b[0] for b in bounds], dtype=float)
    hi = np.array([b[1] for b in bounds], dtype=float)
    best_u, best_f, best_res = None, np.inf, None
    evaluations = 0
    for x0 in starts:
        x0 = np.clip(np.asarray(x0, dtype=float), lo, hi)
        if len(x0) == 0:
            value = objective(x0)[0] if jac else objective(x0)
            return Optimum(x0, -float(value), True, np.zeros(0, bool), np.zeros(0, bool), "", 1)
        if local is not None:
            u, f = local(x0)
            res = None
        else:
            res = _bounded(objective, x0, jac, lo, hi, options)
            u, f = np.asarray(res.x, dtype=float), float(res.fun)
            evaluations += int(res.nfev)
        if f < best_f:
            best_u, best_f, best_res = u, f, res
    if best_res is None:
        # scoring found the basin from each start; scipy's trust-region Newton method (with the
        # information as curvature) confirms the optimum, and scoring keeps it within the bounds
        try:
            with np.errstate(over="ignore", invalid="ignore"):
                best_res = optimize.minimize(objective, best_u, jac=True, hess=fisher,
                                             method="trust-exact",
                                             options={"gtol": 1e-9, "maxiter": 200,
                                                      **(options or {})})
        except ValueError:  # the information is not finite on the way (a rate run to 0 or 1):
            best_res = optimize.OptimizeResult(x=best_u, success=True, nfev=0,  # scoring stands
                                               message="scoring optimum (trust-region step "
                                               "met a non-finite information)")
        evaluations += int(best_res.nfev)
        u, f = local(np.clip(best_res.x, lo, hi))
        if f <= best_f:
            best_u, best_f = u, f
    best_u, best_f = _snap(objective, jac, best_u, best_f, lo, hi)
    at_lo = best_u <= lo + BOUND_TOL
    at_hi = best_u >= hi - BOUND_TOL
    return Optimum(best_u, -best_f, bool(best_res.success) or bool(at_lo.any() or at_hi.any()),
                   at_lo, at_hi, str(best_res.message), evaluations)


def _snap(objective, jac, u, f, lo, hi, reach: float = 12.0, tol: float = 1e-9):
    """Move parameters that stopped on the flat approach to a bound (a probability within about
    1e-5 of 0 or 1, where the likelihood no longer changes) onto the bound, when that costs no
    likelihood; an optimiser stops short there, and the left-over curvature would look like a
    ridge."""
    u = u.copy()
    for i in range(len(u)):
        for bound in (lo[i], hi[i]):
            if 0 < abs(bound - u[i]) < reach:
                cand = u.copy()
                cand[i] = bound
                fc = objective(cand)[0] if jac else objective(cand)
                if fc <= f + tol:
                    u, f = cand, min(f, fc)
    return u, f


def _bounded(objective, x0, jac, lo, hi, options=None):
    """scipy's SLSQP within the bounds: few evaluations on smooth objectives whose gradient is
    taken by finite differences (L-BFGS-B needs more of them here)."""
    opts = {"maxiter": 500, "ftol": 1e-12, **(options or {})}
    with np.errstate(over="ignore", invalid="ignore"):
        return optimize.minimize(objective, x0, jac=jac if jac else None, method="SLSQP",
                                 bounds=list(zip(lo, hi)), options=opts)


def hessian(objective, u, jac: bool = True, step: float = 1e-4) -> np.ndarray:
    """Observed information (Hessian of the negative log-likelihood) by central differences."""
    u = np.asarray(u, dtype=float)
    n = len(u)
    h = np.zeros((n, n))
    if jac:
        for i in range(n):
            e = np.zeros(n)
            e[i] = step
            h[i] = (objective(u + e)[1] - objective(u - e)[1]) / (2 * step)
        return 0.5 * (h + h.T)
    f0 = objective(u)
    for i in range(n):
        ei = np.zeros(n)
        ei[i] = step
        h[i, i] = (objective(u + ei) - 2 * f0 + objective(u - ei)) / step ** 2
        for j in range(i):
            ej = np.zeros(n)
            ej[j] = step
            h[i, j] = h[j, i] = (objective(u + ei + ej) - objective(u + ei - ej)
                                 - objective(u - ei + ej) + objective(u - ei - ej)) / (4 * step ** 2)
    return h


def standard_errors(info: np.ndarray) -> np.ndarray:
    """Square roots of the diagonal of the inverse information; inf where the information is
    singular or not positive definite (a direction the data do not determine)."""
    n = len(info)
    if n == 0:
        return np.zeros(0)
    sym = 0.5 * (info + info.T)
    if not np.all(np.isfinite(sym)):
        return np.full(n, np.inf)
    w = np.linalg.eigvalsh(sym)
    if w.min() <= 1e-13 * max(w.max(), 1e-300):
        return np.full(n, np.inf)
    try:
        var = np.diag(np.linalg.inv(sym))
    except np.linalg.LinAlgError:
        return np.full(n, np.inf)
    return np.sqrt(np.where(var > 0, var, np.inf))


def wald_interval(u_hat: float, se: float, level: float = 0.95) -> tuple[float, float]:
    """estimate -+ z se on the unconstrained scale."""
    z = norm.ppf(0.5 + level / 2)
    return u_hat - z * se, u_hat + z * se


@dataclass
class Profile:
    """Profile deviance of one parameter, with the end points where it crosses the threshold."""

    lower: float
    upper: float
    lower_open: bool = False   # the deviance never reached the threshold before the bound
    upper_open: bool = False
    better: np.ndarray | None = None  # a point of higher likelihood met on the way (the optimum
    points: dict = field(default_factory=dict)  # was only local); deviance per visited value


class Profiler:
    """Profile likelihood intervals for the free parameters of ``objective`` around ``optimum``.

    ``local(u, mask, tol, decrement_tol)`` is a fast fit of the parameters in ``mask`` (else scipy's
    SLSQP runs). ``restarts`` are further starting points (free parameters, unconstrained) for the
    inner fits:
    a point is only declared outside the interval when no start finds a deviance below the
    threshold there.
    """

    def __init__(self, objective, optimum: Optimum, bounds, jac: bool = True,
                 level: float = 0.95, scale=None, local=None, restarts=()):
        self.objective, self.opt, self.jac, self.local = objective, optimum, jac, local
        self.restarts = [np.asarray(r, dtype=float) for r in restarts]
        self.lo = np.array([b[0] for b in bounds], dtype=float)
        self.hi = np.array([b[1] for b in bounds], dtype=float)
        self.q = float(chi2.ppf(level, 1))
        self.fmin = -optimum.loglik
        self.scale = scale  # rough standard errors to size the first steps

    def _inner(self, j: int, t: float, warm: np.ndarray) -> tuple[float, np.ndarray]:
        others = [i for i in range(len(self.opt.u)) if i != j]
        if not others:
            u = np.array([t])
            f = self.objective(u)[0] if self.jac else self.objective(u)
            return float(f), u
        if self.local is not None:
            start = warm.copy()
            start[j] = t
            mask = np.ones(len(start), dtype=bool)
            mask[j] = False
            u, f = self.local(start, mask=mask, tol=1e-8, decrement_tol=1e-11)
            return f, u

        def f_others(v):
            u = np.empty(len(self.opt.u))
            u[others] = v
            u[j] = t
            if self.jac:
                val, g = self.objective(u)
                return val, g[others]
            return self.objective(u)
        res = _bounded(f_others, warm[others], self.jac, self.lo[others], self.hi[others],
                       {"ftol": 1e-10})
        u = np.empty(len(self.opt.u))
        u[others] = res.x
        u[j] = t
        return float(res.fun), u

    def interval(self, j: int) -> Profile:
        """End points of parameter j's interval on the unconstrained scale."""
        step0 = 0.5
        if self.scale is not None and np.isfinite(self.scale[j]) and self.scale[j] > 0:
            step0 = float(np.clip(self.scale[j] * np.sqrt(self.q), 1e-4, 5.0))
        out = Profile(self.opt.u[j], self.opt.u[j])
        best = np.inf
        for side in (-1, 1):
            end, open_, better = self._side(j, side, step0, out.points)
            if better is not None and better[0] < best:
                best, out.better = better[0], better[1]
            if side < 0:
                out.lower, out.lower_open = end, open_
            else:
                out.upper, out.upper_open = end, open_
        return out

    def _side(self, j, side, step, points):
        """Walk from the estimate towards one bound until the signed root of the deviance reaches
        sqrt(q), then solve for the crossing. The root deviance is nearly linear in the parameter,
        so the walk's secant guesses and brentq need few profile evaluations."""
        u_hat = self.opt.u
        limit = self.lo[j] if side < 0 else self.hi[j]
        target = np.sqrt(self.q)
        better = [None]
        if abs(limit - u_hat[j]) <= BOUND_TOL:
            return float(limit), True, None
        warm = {float(u_hat[j]): u_hat.copy()}

        seen = {}

        def root(t, thorough=False):
            t = float(t)
            if t in seen:
                return seen[t]
            # warm starts: the nearest solved points on either side of t; the inner fit can only
            # overestimate the profile deviance, so a value below the threshold is final
            below = [a for a in warm if a <= t]
            above = [a for a in warm if a > t]
            starts = [warm[max(below)]] if below else []
            starts += [warm[min(above)]] if above else []
            if thorough:
                starts += [u_hat] + self.restarts
            f, w = np.inf, None
            tried = set()
            for start in starts:
                key = np.delete(start, j).round(10).tobytes()
                if key in tried:
                    continue
                tried.add(key)
                f2, w2 = self._inner(j, t, start)
                if f2 < f:
                    f, w = f2, w2
                if 2.0 * (f - self.fmin) < self.q:
                    break
            warm[t] = w
            dev = 2.0 * (f - self.fmin)
            points[t] = dev
            if dev < -1e-6 and (better[0] is None or f < better[0][0]):
                better[0] = (f, w.copy())
            seen[t] = np.sqrt(max(dev, 0.0))
            return seen[t]

        t_prev = float(u_hat[j])
        t = float(u_hat[j] + side * step)
        for _ in range(60):
            if (t - limit) * side >= 0:
                t = float(limit)
            r = root(t, thorough=True)
            if r >= target:
                break
            if t == limit:
                return float(limit), True, better[0]
            # secant guess for the crossing, at least 1.5 and at most 4 times further out
            dist = abs(t - u_hat[j])
            guess = dist * target / r if r > 0 else 4.0 * dist
            t_prev = t
            reach = min(max(guess * 1.05, 1.5 * dist), 4.0 * dist, dist + MAX_STEP)
            t = float(u_hat[j] + side * reach)
        lo_t, hi_t = sorted((t_prev, t))
        crossing = optimize.brentq(lambda x: root(x) - target, lo_t, hi_t, xtol=1e-7,
                                   rtol=1e-10, maxiter=200)
        return float(crossing), False, better[0]
