"""The binomial likelihood of sensitivity cells: value, gradient, Fisher information, local fits.

Cell j holds ``trials[j]`` readouts of pools of size k_j with d_j >= 1 positive members, of which
``detected[j]`` read positive: log L = sum_j x_j log Se_j + (n_j - x_j) log(1 - Se_j). Counts may be
fractional. The same object serves the validation fit, its profiles and the parametric bootstrap.

Profile intervals need hundreds of small constrained fits, so the local fit (projected Fisher
scoring, Osborne 1992, Fisher's method of scoring, International Statistical Review 60(1)) runs in
numba, with the families' kernel (families.sens_eval) inside.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .families import Family, sens_eval
from .space import Space
from .validation import Cells

BOUND_TOL = 1e-6  # a parameter this close (unconstrained scale) to its bound sits on it
MAX_STEP = 3.0    # largest move of one scoring step on the unconstrained scale


@njit(cache=True)
def _terms(se, rest, jac, detected, misses, trials):
    """Negative log-likelihood, its gradient and the expected information over all parameters."""
    n_cells, n_par = jac.shape
    value = 0.0
    grad = np.zeros(n_par)
    info = np.zeros((n_par, n_par))
    for i in range(n_cells):
        x, m = detected[i], misses[i]
        score = 0.0
        if x > 0:
            if se[i] <= 0.0:
                return np.inf, grad, info
            value -= x * np.log(se[i])
            score += x / se[i]
        if m > 0:
            if rest[i] <= 0.0:
                return np.inf, grad, info
            value -= m * np.log(rest[i])
            score -= m / rest[i]
        v = se[i] * rest[i]
        w = trials[i] / v if v > 0.0 else 0.0
        for a in range(n_par):
            ja = jac[i, a]
            if ja == 0.0:
                continue
            grad[a] -= score * ja
            for b in range(n_par):
                info[a, b] += w * ja * jac[i, b]
    return value, grad, info


@njit(cache=True)
def _evaluate(code, u, log_r, entry, detected, misses, trials):
    n = len(log_r)
    se, rest, jac = np.empty(n), np.empty(n), np.empty((n, len(u)))
    sens_eval(code, u, log_r, entry, se, rest, jac)
    return _terms(se, rest, jac, detected, misses, trials)


@njit(cache=True)
def _evaluate_rows(code, rows, free, log_r, entry, detected, misses, trials):
    """Negative log-likelihood and expected information (free parameters) at each row of full
    parameter vectors: one call for the thousands of points of an importance sample."""
    n_rows, n_free = rows.shape[0], len(free)
    values = np.empty(n_rows)
    infos = np.empty((n_rows, n_free, n_free))
    for r in range(n_rows):
        value, _, info = _evaluate(code, rows[r], log_r, entry, detected, misses, trials)
        values[r] = value
        for a in range(n_free):
            for b in range(n_free):
                infos[r, a, b] = info[free[a], free[b]]
    return values, infos


@njit(cache=True)
def newton_step(info, grad):
    """info^-1 grad with Jacobi scaling (directions of very different curvature, such as a
    probability near 1 on the logit scale, keep their own step) and a floor on the scaled
    eigenvalues for directions the data do not determine."""
    p = len(grad)
    scale = np.empty(p)
    for a in range(p):
        scale[a] = np.sqrt(max(info[a, a], 1e-300))
    scaled = np.empty((p, p))
    for a in range(p):
        for b in range(p):
            scaled[a, b] = info[a, b] / (scale[a] * scale[b])
    w, v = np.linalg.eigh(scaled)
    floor = 1e-10 * max(w.max(), 1e-300)
    proj = v.T @ (grad / scale)
    for a in range(p):
        proj[a] /= max(w[a], floor)
    return (v @ proj) / scale


@njit(cache=True)
def _scoring(code, u0, allowed, lo, hi, log_r, entry, detected, misses, trials, steps, tol,
             decrement_tol):
    """Projected Fisher scoring with step halving over the ``allowed`` parameters.

    A parameter on a bound whose gradient pushes outwards is held for the step (the active set is
    recomputed every step); steps are capped at MAX_STEP; a parameter that keeps walking towards a
    bound (a probability going to 1 moves about one logit unit per step) is tried on it at once.
    """
    p = len(u0)
    u = u0.copy()
    for i in range(p):
        if allowed[i]:
            u[i] = min(max(u[i], lo[i]), hi[i])
    f, g, info = _evaluate(code, u, log_r, entry, detected, misses, trials)
    drift = np.zeros(p, dtype=np.int64)
    for _ in range(steps):
        idx = np.empty(p, dtype=np.int64)
        nf = 0
        for i in range(p):
            held = (u[i] <= lo[i] + BOUND_TOL and g[i] > 0) or (u[i] >= hi[i] - BOUND_TOL
                                                                 and g[i] < 0)
            if allowed[i] and not held:
                idx[nf] = i
                nf += 1
        if nf == 0:
            break
        idx = idx[:nf]
        sub = np.empty((nf, nf))
        gs = np.empty(nf)
        for a in range(nf):
            gs[a] = g[idx[a]]
            for b in range(nf):
                sub[a, b] = info[idx[a], idx[b]]
        step = newton_step(sub, gs)
        if not np.all(np.isfinite(step)):
            break
        decrement = 0.0
        for a in range(nf):
            decrement += gs[a] * step[a]
            step[a] = min(max(step[a], -MAX_STEP), MAX_STEP)
        t = 1.0
        accepted = False
        cand = u.copy()
        while t > 1e-8:
            for a in range(nf):
                i = idx[a]
                cand[i] = min(max(u[i] - t * step[a], lo[i]), hi[i])
            fc, gc, ic = _evaluate(code, cand, log_r, entry, detected, misses, trials)
            if fc <= f:
                accepted = True
                break
            t *= 0.5
        if not accepted:
            break
        moved = 0.0
        for a in range(nf):
            i = idx[a]
            delta = cand[i] - u[i]
            moved = max(moved, abs(delta))
            if delta > 0.05:
                drift[i] = max(drift[i], 0) + 1
            elif delta < -0.05:
                drift[i] = min(drift[i], 0) - 1
            else:
                drift[i] = 0
        u, f, g, info = cand.copy(), fc, gc, ic
        for a in range(nf):
            i = idx[a]
            if abs(drift[i]) >= 3:
                jump = u.copy()
                jump[i] = hi[i] if drift[i] > 0 else lo[i]
                fj, gj, ij = _evaluate(code, jump, log_r, entry, detected, misses, trials)
                if fj <= f:
                    u, f, g, info = jump, fj, gj, ij
                    moved = max(moved, 1.0)
                drift[i] = 0
        if moved < tol or decrement < decrement_tol:
            break
    return u, f


class CellLikelihood:
    """Negative log-likelihood of sensitivity cells as a function of the free parameters."""

    def __init__(self, family: Family, space: Space, cells: Cells):
        self.family, self.space, self.cells = family, space, cells
        self.log_r, self.entry = family.kernel_inputs(cells.k, cells.d)
        self.detected = np.ascontiguousarray(cells.detected, dtype=float)
        self.trials = np.ascontiguousarray(cells.trials, dtype=float)
        self.misses = self.trials - self.detected
        self.free = np.asarray(space.free, dtype=np.int64)
        self.lo = np.array([p.lower for p in space.params])
        self.hi = np.array([p.upper for p in space.params])
        self._key = None
        self._value = None

    def probabilities(self, u_free):
        """(Se, 1 - Se, dSe/du over all parameters) per cell."""
        return self.family.evaluate(self.space.full(u_free), self.cells.k, self.cells.d)

    def _at(self, u_free):
        key = np.asarray(u_free, dtype=float).tobytes()
        if key != self._key:  # optimisers ask for value and information at the same point
            value, grad, info = _evaluate(self.family.code, self.space.full(u_free), self.log_r,
                                          self.entry, self.detected, self.misses, self.trials)
            f = self.free
            self._key, self._value = key, (value, grad[f], info[np.ix_(f, f)])
        return self._value

    def loglik(self, u_free) -> float:
        return -float(self._at(u_free)[0])

    def __call__(self, u_free):
        """(negative log-likelihood, its gradient) for scipy.optimize with ``jac=True``."""
        value, grad, _ = self._at(u_free)
        return float(value), grad.copy()

    def fisher(self, u_free) -> np.ndarray:
        """Expected information sum_j n_j / (Se_j (1 - Se_j)) J_j J_j^T on the free scale."""
        return self._at(u_free)[2].copy()

    def at_rows(self, u_free_rows):
        """(log-likelihoods, expected informations) at each row of free parameter vectors."""
        rows = np.repeat(self.space.full(np.zeros(self.space.n_free))[None, :],
                         len(u_free_rows), axis=0)
        rows[:, self.free] = u_free_rows
        values, infos = _evaluate_rows(self.family.code, rows, self.free, self.log_r, self.entry,
                                       self.detected, self.misses, self.trials)
        return -values, infos

    def local(self, u_free, mask=None, tol: float = 1e-11, decrement_tol: float = 1e-14,
              steps: int = 100):
        """Local fit from ``u_free`` over the free parameters in ``mask`` (all by default);
        returns (u_free, negative log-likelihood)."""
        allowed = np.zeros(len(self.space.params), dtype=np.bool_)
        allowed[self.free] = True if mask is None else np.asarray(mask, dtype=bool)
        u, f = _scoring(self.family.code, self.space.full(u_free), allowed, self.lo, self.hi,
                        self.log_r, self.entry, self.detected, self.misses, self.trials, steps,
                        tol, decrement_tol)
        return u[self.free], float(f)
