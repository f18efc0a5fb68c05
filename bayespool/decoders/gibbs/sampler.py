"""The sampler driver: warm-up, recording in blocks, convergence checks, the result.

``GibbsSampler(run, lik_ptr, loglik).sample(seed=...)`` runs several chains (single-site Gibbs
updates, pool swaps and, with an unknown prevalence, its conjugate draw) from spread starts. After a
warm-up it records Rao-Blackwellised sums, the number of positives and thinned traces, and checks
every so often whether each undecided specimen has a rank-normalised split R-hat <= 1.01 and a bulk
ESS >= 400 (Vehtari et al. 2021); it stops there or at the sweep cap, and says which.

Memory is bounded: diagnostics follow the specimens that can still be undecided (all of them when
they fit the budget; otherwise those whose pilot estimates are near a threshold, and any other from
the moment it drifts there), and draws are thinned to a few thousand.

The diagnostics are computed on batch means, so the ESS counts effective batches (a conservative
figure: at most about four per batch row), and twice: on the Rao-Blackwellised probabilities and on
the sampled statuses (the indicator). The reported MCSE is the larger of the two, never below the
binomial standard error sqrt(p (1 - p) / draws); R-hat the larger, ESS the smaller. The
Rao-Blackwellised average alone is blind to states the chain has not visited: a specimen whose
conditional probability is the same in every visited state gets a spread of 0 although its estimate
misses the rare states where it differs (one positive pool of 500 members: every member's
conditional probability is the prior whenever another member is positive, and only the rarely
visited state "no other member positive" lifts it). The indicator varies whenever the specimen's
status does, so its error shows what was not explored.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ...progress import progress_bar
from ..exact import impossible
from .backend import Trace
from .blocks import run_block
from .diagnostics import ess, mcse, rhat, rhat_ess
from .model import GibbsModel
from .pool_swap import PoolSwapMove
from .prevalence import PrevalenceMove
from .single_site import SingleSiteMove
from .state import ChainState

CHAINS = 4
WARMUP = 500
MIN_SWEEPS = 1000
MAX_SWEEPS = 40_000
RHAT_TARGET = 1.01
ESS_TARGET = 400.0
MAX_DRAWS = 4000
MEMORY_BUDGET = 256 * 2**20  # bytes for the trace buffers
BATCH_CAPACITY = 256  # batch-mean rows per chain at least (halved when full)
_CHUNK = 2048  # specimens per diagnostics call
_BAND = 5.0  # large runs watch specimens within a factor 5 of a threshold's tail
_ROW_BYTES = 8  # per watched specimen and batch row: two float32 means (probability, indicator)


@dataclass
class GibbsResult:
    """What the chains say about the sampled specimens (arrays over ``specimens``)."""

    specimens: np.ndarray           # indices into the run, ascending
    probability: np.ndarray         # Rao-Blackwellised P(x_i = 1 | readouts)
    mcse: np.ndarray                # Monte Carlo standard error of each probability
    rhat: np.ndarray                # NaN where not monitored
    ess: np.ndarray                 # bulk ESS, NaN where not monitored
    count_distribution: np.ndarray  # P(number of positives among the specimens = c)
    draws: np.ndarray               # (draws, specimens) uint8, thinned joint draws
    draw_chain: np.ndarray          # chain of each draw
    converged: bool
    reason: str
    prevalence: dict | None = None
    diagnostics: dict = field(default_factory=dict)


class GibbsSampler:
    """Several chains over the statuses of ``specimens`` (all by default) of ``run``.

    ``moves`` defaults to single-site updates plus pool swaps; add a :class:`PrevalenceMove` (or
    pass ``prevalence_prior=(a, b)``) to treat the prevalence as unknown with a Beta(a, b) prior,
    which then replaces every specimen's prior.
    """

    def __init__(self, run, lik_ptr, loglik, specimens=None, chains: int = CHAINS, moves=None,
                 prevalence_prior=None):
        if int(chains) < 1:
            raise ValueError("chains must be at least 1")
        moves = list(moves) if moves is not None else [SingleSiteMove(), PoolSwapMove()]
        if prevalence_prior is not None:
            moves = [m for m in moves if not isinstance(m, PrevalenceMove)]
            moves.append(PrevalenceMove(*prevalence_prior))
        if not any(isinstance(m, SingleSiteMove) for m in moves):
            raise ValueError("the single-site move is required (it carries the marginals)")
        self.moves = moves
        self.prevalence_move = next((m for m in moves if isinstance(m, PrevalenceMove)), None)
        swaps = [m for m in moves if isinstance(m, PoolSwapMove)]
        self.swap_rounds = sum(m.rounds for m in swaps)
        self.run_ = run
        self.chains = int(chains)
        self.model = GibbsModel.build(run, lik_ptr, loglik, specimens,
                                      shared_prevalence=self.prevalence_move is not None)

    # ---- one block of sweeps on every chain
    def _advance(self, state: ChainState, trace: Trace, n: int, record: bool, tally):
        m, pm = self.model, self.prevalence_move
        run_block(n, trace.sweeps, record, m.pool_ptr, m.pool_members, m.sample_ptr,
                  m.sample_pools, m.lik_ptr, m.delta, m.base_logit, m.swap_pools, self.swap_rounds,
                  pm is not None, pm.a if pm else 1.0, pm.b if pm else 1.0,
                  state.x, state.d, state.cur, state.total, state.logit_shift, state.prevalence, state.rng,
                  tally, trace.rb, trace.hist, trace.watch, trace.batch, trace.bm_buf,
                  trace.bm_count, trace.bm_stride, trace.dr_x, trace.dr_prev, trace.dr_count,
                  trace.dr_stride)
        if record:
            trace.sweeps += n

    def _trace(self, watched, draw_rows, room_for: int = 0):
        """A fresh Trace; its batch rows leave memory for ``room_for`` columns in all."""
        m = self.model
        rows = self._batch_rows(max(len(watched), room_for))
        return Trace(self.chains, m.n_sampled, watched, rows, draw_rows)

    def _batch_rows(self, n_watched: int) -> int:
        """Rows per chain: enough that half of them over all chains can show the ESS target."""
        want = max(BATCH_CAPACITY, int(np.ceil(4 * self.ess_target / self.chains)))
        per_row = max(1, n_watched) * self.chains * _ROW_BYTES
        return int(max(16, min(want, (self.budget // 2) // per_row)))

    def sample(self, seed=None, warmup: int = WARMUP, min_sweeps: int = MIN_SWEEPS,
               max_sweeps: int = MAX_SWEEPS, rhat_target: float = RHAT_TARGET,
               ess_target: float = ESS_TARGET, negative_below: float = 0.01,
               positive_above: float = 0.99, max_draws: int = MAX_DRAWS,
               memory_budget: int = MEMORY_BUDGET, progress=None, start=None) -> GibbsResult:
        """Run until every undecided specimen meets the R-hat and ESS targets, or ``max_sweeps``.

        ``seed`` (int or Generator) makes the run reproducible. ``max_sweeps`` counts recorded
        sweeps per chain after ``warmup``. ``start``: P(x_i = 1) per specimen of the run to draw
        the first chain's start from (e.g. belief propagation's marginals).
        """
        if int(max_sweeps) < 8:
            raise ValueError("max_sweeps must be at least 8")
        min_sweeps = max(8, min(int(min_sweeps), int(max_sweeps)))
        self.budget = int(memory_budget)
        self.ess_target = float(ess_target)
        self.unfollowed = 0
        rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
        m, run, C = self.model, self.run_, self.chains
        n_order = len(m.order)
        pm = self.prevalence_move
        state = ChainState.spread(m, run, C, rng, None if pm is None else (pm.a, pm.b), start)
        tally = np.zeros((C, 2), dtype=np.int64)
        draw_rows = int(max(2, min(max_draws // C, (self.budget // 2) // max(1, C * n_order))))
        notes = []
        t0 = time.perf_counter()
        bar = progress_bar(progress, int(warmup) + int(max_sweeps), desc="gibbs", unit="sweep",
                           delay=2.0)

        # warm-up, then make sure every chain sits in an allowed state
        scratch = self._trace(np.zeros(0, np.int64), 2)
        self._advance(state, scratch, int(warmup), False, tally)
        bar.update(int(warmup))
        self._repair(state, notes)

        # which specimens to follow
        fits = n_order * C * _ROW_BYTES * 64 <= self.budget // 2
        if fits:
            watched = np.arange(n_order)
        else:
            pilot = max(100, int(warmup) // 2)
            self._advance(state, scratch, pilot, True, tally)
            watched = self._near_threshold(scratch, np.zeros(0, np.int64), negative_below,
                                           positive_above)
        trace = self._trace(watched, draw_rows, room_for=0 if fits else 2 * len(watched) + 100)
        if trace.batch_capacity * C < 4 * self.ess_target:
            notes.append(f"the memory budget allows {trace.batch_capacity} batch rows per chain "
                         f"for {len(watched)} followed specimens, too few to show an ESS of "
                         f"{self.ess_target:g}; raise memory_budget")
        next_check = min_sweeps
        tally[:] = 0
        while True:
            room = trace.room()
            if room <= 0:
                trace.compact()
                continue
            n = min(room, next_check - trace.sweeps, int(max_sweeps) - trace.sweeps)
            self._advance(state, trace, n, True, tally)
            bar.update(n)
            if trace.sweeps < next_check and trace.sweeps < max_sweeps:
                continue
            if not fits:
                self._follow_more(trace, negative_below, positive_above, notes)
            check = self._check(trace, negative_below, positive_above, rhat_target, ess_target)
            if check["converged"] or trace.sweeps >= max_sweeps:
                break
            next_check = trace.sweeps + max(min_sweeps // 2, trace.sweeps // 4)
        bar.close()
        seconds = time.perf_counter() - t0
        self._repair(state, notes, final=True)
        return self._result(trace, check, tally, seconds, int(warmup), int(max_sweeps), notes,
                            rhat_target, ess_target)

    def throughput(self, n_sweeps: int, seed=None, repeats: int = 3) -> float:
        """Site updates per second of the sweep kernel alone (recording on, nothing watched).

        For benchmarks: runs ``n_sweeps`` sweeps of every chain ``repeats`` times after a short
        warm-up and returns the best rate; numba's thread count decides how many cores it uses.
        """
        rng = np.random.default_rng(seed)
        self.budget, self.ess_target = MEMORY_BUDGET, ESS_TARGET
        pm = self.prevalence_move
        state = ChainState.spread(self.model, self.run_, self.chains, rng,
                                  None if pm is None else (pm.a, pm.b))
        tally = np.zeros((self.chains, 2), dtype=np.int64)
        best = 0.0
        for r in range(repeats + 1):
            trace = self._trace(np.zeros(0, np.int64), 2)
            trace.dr_stride = 2 * (n_sweeps + 1)  # no draw rows: this measures the sweeps
            t0 = time.perf_counter()
            self._advance(state, trace, n_sweeps if r else 1, True, tally)
            dt = time.perf_counter() - t0
            if r:
                best = max(best, n_sweeps * self.model.n_sampled * self.chains / dt)
        return best

    # ---- pieces of sample()
    def _repair(self, state: ChainState, notes: list, final: bool = False):
        """Chains in a state that breaks a hard constraint restart from an allowed chain's state."""
        m = self.model
        bad = [c for c in range(self.chains) if len(m.violations(state.x[c]))]
        if not bad:
            return
        good = [c for c in range(self.chains) if c not in bad]
        if not good:
            raise impossible(self.run_, m.violations(state.x[bad[0]]))
        if final:  # cannot happen from an allowed state; kept as a guard
            raise RuntimeError("a chain left the allowed states")
        for c in bad:
            src = good[c % len(good)]
            state.x[c] = state.x[src]
            state.d[c] = state.d[src]
            state.cur[c] = state.cur[src]
            state.total[c] = state.total[src]
            state.logit_shift[c] = state.logit_shift[src]
            state.prevalence[c] = state.prevalence[src]
        notes.append(f"{len(bad)} chain(s) found no state allowed by the hard constraints during "
                     "warm-up and restarted from another chain's state")

    def _follow_more(self, trace: Trace, lo, hi, notes: list):
        """Large runs: also follow specimens that came near a threshold, as far as memory allows."""
        more = self._near_threshold(trace, trace.watched, lo, hi)
        if not len(more):
            return
        room = (self.budget // 2) // (self.chains * trace.batch_capacity * _ROW_BYTES) \
            - len(trace.watched)
        if room < len(more):
            self.unfollowed = max(self.unfollowed, len(more) - max(0, room))
            more = more[:max(0, room)]
        if len(more):
            trace.extend(more)
            notes.append(f"{len(more)} more specimen(s) came near a threshold after "
                         f"{trace.sweeps} sweeps and are followed from then on")

    def _near_threshold(self, trace: Trace, already, lo, hi) -> np.ndarray:
        """Sampled specimens (in sweep numbering) of specimens some chain puts near or past a threshold."""
        per_chain = trace.rb / max(1, trace.sweeps)
        near = ((per_chain >= lo / _BAND) & (per_chain <= 1.0 - (1.0 - hi) / _BAND)).any(axis=0)
        return np.setdiff1d(np.flatnonzero(near), already)

    def _estimates(self, trace: Trace):
        per_chain = trace.rb / max(1, trace.sweeps)
        return per_chain.mean(axis=0), per_chain

    def _check(self, trace, lo, hi, rhat_target, ess_target) -> dict:
        prob, per_chain = self._estimates(trace)
        w = trace.watched
        pw, cw = prob[w], per_chain[:, w]
        undecided = (pw >= lo) & (pw <= hi)
        straddle = ((cw < lo).any(axis=0) & (cw >= lo).any(axis=0)) | \
                   ((cw > hi).any(axis=0) & (cw <= hi).any(axis=0))
        crit = np.flatnonzero(undecided | straddle)
        out = {"criterion": w[crit]}
        out["rhat"], out["ess"], _ = _diagnose(trace, crit, pw[crit])
        out["converged"] = bool(self.unfollowed == 0 and (out["rhat"] <= rhat_target).all()
                                and (out["ess"] >= ess_target).all())
        return out

    def _result(self, trace, check, tally, seconds, warmup, max_sweeps, notes, rhat_target,
                ess_target) -> GibbsResult:
        m, C = self.model, self.chains
        prob, per_chain = self._estimates(trace)
        n_order = len(m.order)
        err = np.full(n_order, np.nan)
        r_all = np.full(n_order, np.nan)
        e_all = np.full(n_order, np.nan)
        if C > 1:
            err = per_chain.std(axis=0, ddof=1) / np.sqrt(C)
        # never below the binomial standard error of a proportion over every recorded draw
        err = np.fmax(err, _binomial_se(prob, C * trace.sweeps))
        w = trace.watched
        if len(w):
            r_all[w], e_all[w], werr = _diagnose(trace, np.arange(len(w)), prob[w])
            err[w] = np.where(np.isfinite(werr), werr, err[w])
        hist = trace.hist.sum(axis=0)
        dist = hist / hist.sum()
        draws = trace.draws()
        draw_chain = np.repeat(np.arange(C), draws.shape[1])
        draws = draws.reshape(-1, n_order)
        crit = check["criterion"]
        converged = bool(check["converged"])
        worst_r, worst_e = _nanmax(check["rhat"]), _nanmin(check["ess"])
        if converged:
            reason = (f"converged: every undecided specimen has R-hat <= {rhat_target:g} and "
                      f"ESS >= {ess_target:g} after {trace.sweeps} sweeps of {C} chains"
                      if len(crit) else
                      f"converged: every specimen is decided by all {C} chains after "
                      f"{trace.sweeps} sweeps")
        else:
            bad = int((~(check["rhat"] <= rhat_target) | ~(check["ess"] >= ess_target)).sum())
            reason = (f"stopped at the cap of {max_sweeps} sweeps: {bad} undecided specimen(s) "
                      f"still have R-hat > {rhat_target:g} or ESS < {ess_target:g} "
                      f"(worst R-hat {_fmt(worst_r, '.3f')}, lowest ESS {_fmt(worst_e, '.0f')})")
            if self.unfollowed:
                reason += (f"; {self.unfollowed} specimen(s) near a threshold could not be "
                           "followed within the memory budget")
        updates = (warmup + trace.sweeps) * n_order * C
        diag = {"converged": converged, "stop": reason, "chains": C, "warmup": warmup,
                "sweeps": int(trace.sweeps), "max_sweeps": max_sweeps,
                "rhat_max": worst_r, "ess_min": worst_e, "undecided_monitored": int(len(crit)),
                "rhat_max_all": _nanmax(r_all), "ess_min_all": _nanmin(e_all),
                "monitored": int(len(w)), "draws_kept": int(len(draws)),
                "moves": [repr(mv) for mv in self.moves],
                "swap_acceptance": (float(tally[:, 1].sum() / tally[:, 0].sum())
                                    if tally[:, 0].sum() else None),
                "seconds": round(seconds, 3),
                "site_updates_per_second": float(updates / seconds) if seconds > 0 else None}
        if notes:
            diag["notes"] = list(notes)
        prevalence = None
        if self.prevalence_move is not None:
            pdraws = trace.prevalence_draws()
            flat = pdraws.ravel()
            prevalence = {"prior": [self.prevalence_move.a, self.prevalence_move.b],
                          "mean": float(flat.mean()), "sd": float(flat.std(ddof=1)),
                          "interval_95": [float(np.quantile(flat, 0.025)),
                                          float(np.quantile(flat, 0.975))]}
            if pdraws.shape[1] >= 4:
                prevalence["ess"] = float(ess(pdraws))
                prevalence["rhat"] = float(rhat(pdraws))
        perm = np.argsort(m.order, kind="stable")  # report in the run's specimen order
        if not np.array_equal(perm, np.arange(n_order)):
            draws = np.take(draws, perm, axis=1)
        return GibbsResult(m.order[perm], prob[perm], err[perm], r_all[perm], e_all[perm], dist,
                           np.ascontiguousarray(draws), draw_chain, converged, reason,
                           prevalence, diag)


def _diagnose(trace: Trace, cols: np.ndarray, prob: np.ndarray):
    """R-hat, bulk ESS and MCSE of watched columns ``cols`` (estimates ``prob``).

    Each is computed on the Rao-Blackwell batch means and on the indicator batch means; R-hat is
    the larger, ESS the smaller and the MCSE the larger, the indicator's never below the binomial
    standard error of ``prob`` over the draws used. Columns followed from a later row are grouped by
    that row; fewer than 8 valid rows give NaN (not converged).
    """
    bm, ind = trace.batch_means(), trace.indicator_means()
    r = np.full(len(cols), np.nan)
    e = np.full(len(cols), np.nan)
    err = np.full(len(cols), np.nan)
    first = trace.first_row[cols]
    for f in np.unique(first):
        group = np.flatnonzero(first == f)
        if bm.shape[1] - f < 8:
            continue
        draws = trace.n_chains * (bm.shape[1] - f) * trace.bm_stride
        for start in range(0, len(group), _CHUNK):  # bounded temporary memory
            pick = group[start:start + _CHUNK]
            sub = bm[:, f:, cols[pick]].astype(float)
            sub_ind = ind[:, f:, cols[pick]].astype(float)
            r_rb, e_rb = rhat_ess(sub)
            r_ind, e_ind = rhat_ess(sub_ind)
            r[pick] = np.fmax(r_rb, r_ind)
            e[pick] = np.fmin(e_rb, e_ind)
            floor = _binomial_se(prob[pick], draws)
            err[pick] = np.fmax(mcse(sub), np.fmax(mcse(sub_ind), floor))
    return r, e, err


def _binomial_se(p, n):
    """sqrt(p (1 - p) / n): the error of a proportion over n independent draws."""
    p = np.clip(np.asarray(p, dtype=float), 0.0, 1.0)
    return np.sqrt(p * (1.0 - p) / max(1, n))


def _fmt(value, spec):
    return "n/a" if value is None else format(value, spec)


def _nanmax(a):
    a = a[np.isfinite(a)]
    return float(a.max()) if len(a) else None


def _nanmin(a):
    a = a[np.isfinite(a)]
    return float(a.min()) if len(a) else None


