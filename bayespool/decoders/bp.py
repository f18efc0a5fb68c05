"""Loopy belief propagation (sum-product) on the sample-pool graph, messages as log-odds.

Method: Sejdinovic, D. & Johnson, O. (2010), Note on noisy group testing: asymptotic bounds and
belief propagation reconstruction, Allerton Conference; the sum-product rules of Kschischang, Frey &
Loeliger (2001), Factor graphs and the sum-product algorithm, IEEE Trans. Inf. Theory 47(2).

Each read pool t is one factor L_t[d] over the number d of positive members (replicates already
folded in). With ``m_j`` the log-odds that member j sends to the pool (its prior log-odds plus the
messages of its other pools), the pool answers member i with

    mu_{t->i} = log P(y_t | x_i = 1) - log P(y_t | x_i = 0),
    P(y_t | x_i = v) = sum_a prefix_i[a] * g_{i+1}[a + v],

where ``prefix_i`` is the Poisson-binomial distribution of the members before i and ``g`` is L folded
backwards through the members after i. That is exact for the factor and costs O(k^2) per pool. When
L[1] = ... = L[k] (sensitivity independent of d, e.g. a constant assay) only "all other members
negative" matters, and the message is computed in O(k) from prefix and suffix products of
P(x_j = 0) and P(some x_j = 1), in probabilities while that is exact and in logs beyond.

Schedule: sequential (pool by pool, each member's belief updated at once), in a canonical pool order
(sorted pool IDs), so results do not depend on the order of rows in the input files. Flooding
(every pool from the previous sweep's beliefs) could run in parallel, but it needs about twice the
sweeps: 38 against 21 to a residual of 1e-8 on the benchmark's million-specimen screen (54 and 41
with damping 0.3), so on two cores it would at best break even. Hard constraints (Se or Sp of 1) give messages of +-inf; beliefs keep counts of infinite
messages apart from the finite sum, so no inf - inf ever happens, and a specimen forced both ways is
reported as impossible evidence. Finite probabilities too small for a double (below ~1e-308) are
floored at the smallest positive double rather than turned into hard zeros.
"""
from __future__ import annotations

import sys
import time
from dataclasses import dataclass, field

import numpy as np
from numba import njit

from ..defaults import BP_DAMPING as DAMPING  # new = damping * old + (1 - damping) * computed
from ..defaults import BP_MAX_SWEEPS as MAX_SWEEPS
from ..defaults import BP_TOLERANCE as TOLERANCE  # converged: no message moved this much in a sweep
from ..progress import progress_bar
from ..validation import check_count, check_fraction, check_positive
from .exact import impossible

_INF = np.inf
_TINY = 5e-324        # smallest positive double: floor for probabilities that underflow


# ---- scalar helpers (log domain)
@njit(cache=True)
def _log_prob_negative(m):
    """log P(x = 0) from log-odds m = log P(x=1)/P(x=0), exact at +-inf."""
    if m == _INF:
        return -_INF
    if m == -_INF:
        return 0.0
    if m > 0.0:
        return -m - np.log1p(np.exp(-m))
    return -np.log1p(np.exp(m))


@njit(cache=True)
def _logaddexp(a, b):
    if a == -_INF:
        return b
    if b == -_INF:
        return a
    if a > b:
        return a + np.log1p(np.exp(b - a))
    return b + np.log1p(np.exp(a - b))


@njit(cache=True)
def _probabilities(m):
    """(P(x=1), P(x=0)) from log-odds, each computed without cancellation."""
    if m == _INF:
        return 1.0, 0.0
    if m == -_INF:
        return 0.0, 1.0
    if m >= 0.0:
        e = np.exp(-m)
        inv = 1.0 / (1.0 + e)
        return inv, e * inv
    e = np.exp(m)
    inv = 1.0 / (1.0 + e)
    return e * inv, inv


# ---- one factor
_LINEAR_SAFE = 600.0  # |log-odds| and |log L0 - log L1| within which the linear flat path is exact


@njit(cache=True)
def _messages_flat(log_l0, log_l1, m_in, k, out, lqb, pre, q, qb):
    """Messages of a pool whose L[d] is the same for every d >= 1: O(k).

    P(y | x_i = 0) = P0 L0 + (1 - P0) L1 with P0 = prod_{j != i} P(x_j = 0), so
    mu_i = log L1 - log(P0 L0 + (1 - P0) L1) = -log((1 - P0) + P0 r), r = L0 / L1.
    Returns 0, or 1 when the readouts of this pool cannot be explained.
    """
    if log_l1 != -_INF and (log_l0 == -_INF or abs(log_l0 - log_l1) <= _LINEAR_SAFE):
        safe = True
        for j in range(k):
            if m_in[j] != _INF and m_in[j] != -_INF and abs(m_in[j]) > _LINEAR_SAFE:
                safe = False
                break
        if safe:
            _messages_flat_linear(np.exp(log_l0 - log_l1), m_in, k, out, lqb, pre, q, qb)
            return 0
    return _messages_flat_log(log_l0, log_l1, m_in, k, out, lqb, pre)


@njit(cache=True)
def _messages_flat_linear(r, m_in, k, out, pn, ps, q, qb):
    """The flat path in probabilities: P0 and 1 - P0 are both carried as products and sums of
    positive terms (no cancellation), so it is accurate when no log-odds exceeds _LINEAR_SAFE.
    ``pn``/``ps`` receive, for the members before j, P(all negative) and P(some positive)."""
    none_neg = 1.0  # P(every member so far negative)
    some_pos = 0.0  # P(some member so far positive) = 1 - none_neg, kept without cancellation
    for j in range(k):
        pn[j] = none_neg
        ps[j] = some_pos
        q[j], qb[j] = _probabilities(m_in[j])
        some_pos = some_pos + none_neg * q[j]
        none_neg = none_neg * qb[j]
    none_neg = 1.0
    some_pos = 0.0
    for j in range(k - 1, -1, -1):
        p0 = pn[j] * none_neg                    # P(every other member negative)
        p_some = ps[j] + pn[j] * some_pos        # P(some other member positive)
        out[j] = -np.log(p_some + p0 * r)        # +inf when nothing but x_j = 1 explains the pool
        some_pos = some_pos + none_neg * q[j]
        none_neg = none_neg * qb[j]


@njit(cache=True)
def _messages_flat_log(log_l0, log_l1, m_in, k, out, lpn, lps):
    """The flat path in logs, for extreme log-odds or likelihood ratios and for Se = 1.

    ``lpn``/``lps`` receive, for the members before j, log P(all negative) and log P(some
    positive); P(some positive) is built as "the first positive is member j" terms, so it stays
    accurate (and exactly -inf only when every other member is known negative) at any log-odds.
    """
    none_neg = 0.0
    some_pos = -_INF
    for j in range(k):
        lpn[j] = none_neg
        lps[j] = some_pos
        some_pos = _logaddexp(some_pos, none_neg + _log_prob_negative(-m_in[j]))
        none_neg += _log_prob_negative(m_in[j])
    none_neg = 0.0
    some_pos = -_INF
    for j in range(k - 1, -1, -1):
        lp0 = lpn[j] + none_neg                                  # log P(every other negative)
        lsome = _logaddexp(lps[j], lpn[j] + some_pos)           # log P(some other positive)
        if log_l1 == -_INF:  # Se = 1 and a negative readout: no member can be positive
            if lp0 == -_INF or log_l0 == -_INF:
                return 1
            out[j] = -_INF
        else:
            out[j] = -_logaddexp(lp0 + log_l0 - log_l1, lsome)
        some_pos = _logaddexp(some_pos, none_neg + _log_prob_negative(-m_in[j]))
        none_neg += _log_prob_negative(m_in[j])
    return 0


@njit(cache=True)
def _g_offset(s):
    """Start of the block g[s] (length s + 1) in the flat scratch array, s >= 1."""
    return (s - 1) * (s + 2) // 2


@njit(cache=True)
def _structural_zero(log_l, lo, free, v):
    """True when L[a + v] = 0 for every count a the other members can reach (lo..lo + free)."""
    for a in range(lo, lo + free + 1):
        if log_l[a + v] != -_INF:
            return False
    return True


@njit(cache=True)
def _messages_general(log_l, m_in, k, out, q, qb, g, prefix):
    """Messages of a pool with a general count-dependent L[d], d = 0..k: O(k^2).

    g[k] = L / max L; g[s][a] = P(x_s=0) g[s+1][a] + P(x_s=1) g[s+1][a+1] folds L backwards through
    members s..k-1; prefix is the Poisson-binomial distribution of members 0..s-1. Then
    P(y | x_s = v) is proportional to sum_a prefix[a] g[s+1][a + v]. Returns 0, or 1 when the
    readouts of this pool cannot be explained.
    """
    top = -_INF
    for d in range(k + 1):
        if log_l[d] > top:
            top = log_l[d]
    if top == -_INF:
        return 1
    n_fixed_pos = 0
    n_free = 0
    for s in range(k):
        q[s], qb[s] = _probabilities(m_in[s])
        if m_in[s] == _INF:
            n_fixed_pos += 1
        elif m_in[s] != -_INF:
            n_free += 1
    o = _g_offset(k)
    for d in range(k + 1):
        g[o + d] = np.exp(log_l[d] - top)
    for s in range(k - 1, 0, -1):
        o, on = _g_offset(s), _g_offset(s + 1)
        for a in range(s + 1):
            g[o + a] = qb[s] * g[on + a] + q[s] * g[on + a + 1]
    prefix[0] = 1.0
    for s in range(k):
        on = _g_offset(s + 1)
        p0 = 0.0
        p1 = 0.0
        for a in range(s + 1):
            p0 += prefix[a] * g[on + a]
            p1 += prefix[a] * g[on + a + 1]
        lo = n_fixed_pos - (1 if m_in[s] == _INF else 0)
        free = n_free - (1 if (m_in[s] != _INF and m_in[s] != -_INF) else 0)
        zero0 = p0 == 0.0 and _structural_zero(log_l, lo, free, 0)
        zero1 = p1 == 0.0 and _structural_zero(log_l, lo, free, 1)
        if zero0 and zero1:
            return 1
        if zero1:
            out[s] = -_INF
        elif zero0:
            out[s] = _INF
        else:
            out[s] = np.log(max(p1, _TINY)) - np.log(max(p0, _TINY))
        prefix[s + 1] = q[s] * prefix[s]
        for a in range(s, 0, -1):
            prefix[a] = qb[s] * prefix[a] + q[s] * prefix[a - 1]
        prefix[0] *= qb[s]
    return 0


@njit(cache=True)
def _pool_messages(log_l, flat, m_in, k, out, s1, s2, s3, s4, g):
    if flat:
        return _messages_flat(log_l[0], log_l[1], m_in, k, out, s1, s2, s3, s4)
    return _messages_general(log_l, m_in, k, out, s1, s2, g, s3)


# ---- sweeps
# Per-sample state, one row of 4 doubles (a cache line holds two samples): the finite part of the
# belief (prior log-odds plus finite incoming messages) and the numbers of +inf and -inf incoming
# messages (the fourth column pads the row).
FIN, UP, DOWN = 0, 1, 2


@njit(cache=True)
def _init_state(order, pool_ptr, pool_members, mu, prior_logodds, state):
    """Beliefs from scratch from the current messages."""
    for i in range(len(prior_logodds)):
        state[i, FIN] = prior_logodds[i]
        state[i, UP] = 0.0
        state[i, DOWN] = 0.0
        state[i, 3] = 0.0
    for oi in range(len(order)):
        t = order[oi]
        for a in range(pool_ptr[t], pool_ptr[t + 1]):
            _add_message(state, pool_members[a], mu[a], 1.0)


@njit(cache=True)
def _add_message(state, i, v, sign):
    if v == _INF:
        state[i, UP] += sign
    elif v == -_INF:
        state[i, DOWN] += sign
    else:
        state[i, FIN] += sign * v


@njit(cache=True)
def _sweep(order, pool_ptr, pool_members, lik_ptr, loglik, flat, mu, state, damping, pool_delta,
           m_in, out, s1, s2, s3, s4, g):
    """One sequential sweep over the pools of ``order``: each pool reads its members' current
    beliefs, computes its messages and updates the beliefs at once.

    Returns (residual, status, pool, sample); status 1: a pool's readouts cannot be explained,
    2: a sample is forced both positive and negative.
    """
    residual = 0.0
    keep = 1.0 - damping
    for oi in range(len(order)):
        t = order[oi]
        p0 = pool_ptr[t]
        k = pool_ptr[t + 1] - p0
        for s in range(k):
            i = pool_members[p0 + s]
            old = mu[p0 + s]
            f = state[i, FIN]
            up = state[i, UP]
            down = state[i, DOWN]
            if old == _INF:
                up -= 1.0
            elif old == -_INF:
                down -= 1.0
            else:
                f -= old
            if up > 0.0 and down > 0.0:
                return residual, 2, t, i
            m_in[s] = _INF if up > 0.0 else (-_INF if down > 0.0 else f)
        lo = lik_ptr[t]
        if _pool_messages(loglik[lo:lo + k + 1], flat[t], m_in, k, out, s1, s2, s3, s4, g):
            return residual, 1, t, -1
        dmax = 0.0
        for s in range(k):
            a = p0 + s
            old = mu[a]
            new = out[s]
            if damping > 0.0 and abs(old) != _INF and abs(new) != _INF:
                new = damping * old + keep * new
            if new == old:
                continue
            change = abs(new - old)
            if change > dmax:
                dmax = change
            i = pool_members[a]
            _add_message(state, i, old, -1.0)
            _add_message(state, i, new, 1.0)
            mu[a] = new
        pool_delta[t] = dmax
        if dmax > residual:
            residual = dmax
    return residual, 0, -1, -1


@njit(cache=True)
def _posterior(state, samples, prob):
    """P(x_i = 1) from beliefs; returns the first sample forced both ways, or -1."""
    for b in range(len(samples)):
        i = samples[b]
        if state[i, UP] > 0.0 and state[i, DOWN] > 0.0:
            return i
        if state[i, UP] > 0.0:
            prob[i] = 1.0
        elif state[i, DOWN] > 0.0:
            prob[i] = 0.0
        else:
            prob[i] = _probabilities(state[i, FIN])[0]
    return -1


@njit(cache=True)
def _flat_check(lik_ptr, loglik):
    """Pools whose L[d] is the same for every d >= 1 (they take the O(k) path)."""
    n = len(lik_ptr) - 1
    out = np.ones(n, dtype=np.bool_)
    for t in range(n):
        first = loglik[lik_ptr[t] + 1] if lik_ptr[t + 1] - lik_ptr[t] > 1 else 0.0
        for a in range(lik_ptr[t] + 2, lik_ptr[t + 1]):
            if loglik[a] != first:
                out[t] = False
                break
    return out


# ---- the decoder
@dataclass
class BPResult:
    """Marginals from belief propagation and how the iteration ended.

    ``probability`` covers the decoded samples (others keep their prior). ``residual`` is the largest
    change of any message (log-odds) in the last sweep; ``component_residual`` the same per decoded
    component, so callers can re-decode only the components that did not converge.
    """

    probability: np.ndarray
    converged: bool
    sweeps: int
    residual: float
    components: np.ndarray                 # decoded component ids
    component_residual: np.ndarray         # per decoded component
    tolerance: float = TOLERANCE
    damping: float = DAMPING
    max_sweeps: int = MAX_SWEEPS
    seconds: float = 0.0
    general_pools: int = 0                 # pools that took the O(k^2) path
    flat_pools: int = 0                    # pools that took the O(k) path
    schedule: str = "sequential"
    history: list = field(default_factory=list)  # residual after each sweep
    cpu_seconds: float = 0.0

    @property
    def unconverged(self) -> np.ndarray:
        """Component ids whose last-sweep residual is not below the tolerance."""
        return self.components[~(self.component_residual < self.tolerance)]

    def diagnostics(self) -> dict:
        return {"converged": bool(self.converged), "sweeps": int(self.sweeps),
                "residual": finite_or_none(self.residual), "tolerance": self.tolerance,
                "damping": self.damping, "max_sweeps": self.max_sweeps,
                "schedule": self.schedule, "seconds": round(self.seconds, 4),
                "cpu_seconds": round(self.cpu_seconds, 4),
                "components": int(len(self.components)),
                "unconverged_components": int(len(self.unconverged)),
                "pools_general": self.general_pools, "pools_constant": self.flat_pools}


def finite_or_none(x):
    """A float, or None where it is not finite (JSON has no inf or NaN)."""
    x = float(x)
    return x if np.isfinite(x) else None


def canonical_pool_order(run, pools: np.ndarray) -> np.ndarray:
    """``pools`` sorted by pool ID: the sweep order, independent of the input files' row order."""
    ids = np.asarray(run.pool_ids, dtype=object)[pools].astype(str)
    return pools[np.argsort(ids, kind="stable")].astype(np.int32)


def _members_of(run, comps, selected):
    """Read pools (int64) and samples (int32) of the selected components."""
    if len(selected) == comps.n_components:
        return comps.pools.astype(np.int64), comps.samples.astype(np.int32)
    chosen = np.zeros(comps.n_components, dtype=np.bool_)
    chosen[selected] = True
    pools = comps.pools[chosen[comps.sample_label[run.pool_members[run.pool_ptr[comps.pools]]]]]
    samples = np.flatnonzero(chosen[comps.sample_label]).astype(np.int32)
    return pools.astype(np.int64), samples


def check_bp_options(damping, tolerance, max_sweeps) -> tuple[float, float, int]:
    """Belief propagation's options, checked in one place for ``decode`` and ``decode_bp``."""
    return (check_fraction(damping, "damping"), check_positive(tolerance, "tolerance"),
            check_count(max_sweeps, "max_sweeps"))


def decode_bp(run, lik_ptr, loglik, comps, selected=None, damping: float = DAMPING,
              tolerance: float = TOLERANCE, max_sweeps: int = MAX_SWEEPS,
              progress: bool | None = None) -> BPResult:
    """Belief-propagation marginals for the selected components (all by default).

    Raises ImpossibleEvidenceError when hard constraints make the readouts impossible (a pool no
    state explains, or a specimen forced both positive and negative).
    """
    damping, tolerance, max_sweeps = check_bp_options(damping, tolerance, max_sweeps)
    if selected is None:
        selected = np.arange(comps.n_components)
    selected = np.asarray(selected, dtype=np.int64)
    pools, samples = _members_of(run, comps, selected)
    order = canonical_pool_order(run, pools)
    flat = _flat_check(lik_ptr, loglik)
    prior = run.prior
    prior_logodds = np.log(prior) - np.log1p(-prior)
    mu = np.zeros(run.n_memberships)
    state = np.empty((run.n_samples, 4))
    pool_delta = np.zeros(run.n_pools)
    kmax = int(run.pool_size[pools].max()) if len(pools) else 1
    m_in, out = np.empty(kmax + 1), np.empty(kmax + 1)
    s1, s2, s3, s4 = (np.empty(kmax + 2) for _ in range(4))
    g = np.empty(_g_offset(kmax + 1) + 1)
    residual, sweeps, converged, history = np.inf, 0, False, []
    start, start_cpu = time.perf_counter(), time.process_time()
    _init_state(order, run.pool_ptr, run.pool_members, mu, prior_logodds, state)
    if progress is None:  # only long runs show a bar by default
        progress = sys.stderr.isatty() and len(order) >= 100_000
    bar = progress_bar(progress, max_sweeps, desc="belief propagation", unit="sweep")
    try:
        for sweeps in range(1, max_sweeps + 1):
            residual, status, t, i = _sweep(order, run.pool_ptr, run.pool_members, lik_ptr, loglik,
                                            flat, mu, state, float(damping), pool_delta, m_in, out,
                                            s1, s2, s3, s4, g)
            if status:
                raise _impossible_at(run, comps, t, i)
            history.append(float(residual))
            bar.update(1)
            bar.set_postfix(residual=f"{residual:.2e}")
            if residual < tolerance:
                converged = True
                break
    finally:
        bar.close()
    seconds, cpu_seconds = time.perf_counter() - start, time.process_time() - start_cpu
    prob = np.array(prior, dtype=float)
    bad = _posterior(state, samples, prob)
    if bad >= 0:
        raise _impossible_at(run, comps, -1, bad)
    label = comps.sample_label[run.pool_members[run.pool_ptr[pools]]].astype(np.int64)
    comp_res = np.zeros(comps.n_components)
    np.maximum.at(comp_res, label, pool_delta[pools])
    n_general = int((~flat[pools]).sum())
    return BPResult(prob, converged, sweeps, float(residual), selected, comp_res[selected],
                    tolerance, damping, max_sweeps, seconds, n_general, len(pools) - n_general,
                    history=history, cpu_seconds=cpu_seconds)


def _impossible_at(run, comps, t, i):
    """The impossible-evidence error for a pool (t >= 0) or a sample forced both ways (i >= 0)."""
    if t >= 0:
        pools = np.array([t])
    else:
        pools = run.pools_of(i)
        pools = pools[run.pool_read[pools]]
    return impossible(run, pools)


def pool_messages(log_l, incoming, path: str = "auto") -> np.ndarray:
    """Messages (log-odds) that one pool with log-likelihood vector ``log_l`` (d = 0..k) sends to its
    k members, given the log-odds ``incoming`` they send to it; for checks and exploration.

    ``path`` is ``"auto"`` (O(k) when L[1:] is constant), ``"general"`` (always the O(k^2) path).
    """
    log_l = np.asarray(log_l, dtype=float)
    m_in = np.asarray(incoming, dtype=float)
    k = len(m_in)
    if len(log_l) != k + 1:
        raise ValueError("log_l must have one entry per count 0..k")
    if path not in ("auto", "general"):
        raise ValueError(f"path must be 'auto' or 'general', got {path!r}")
    out = np.empty(k)
    s = [np.empty(k + 2) for _ in range(4)]
    g = np.empty(_g_offset(k + 1) + 1)
    flat = path == "auto" and bool(_flat_check(np.array([0, k + 1], dtype=np.int64), log_l)[0])
    if _pool_messages(log_l, flat, m_in, k, out, s[0], s[1], s[2], s[3], g):
        raise ValueError("no state of the members explains this pool's readouts")
    return out
