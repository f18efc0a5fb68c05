"""Does the assay model fit the readouts? A posterior predictive check (Gelman, Meng & Stern 1996,
Statistica Sinica 6:733).

Every probability bayespool reports rests on the assay file. This check replicates the readouts
from the model and compares them with the readouts at hand, by pool size. Readouts of pools of
several specimens are replicated from statuses drawn from the priors; readouts of specimens tested
alone from statuses drawn from the joint posterior given the pooled readouts only, with the pooled
readouts held as observed. Follow-up tests exist because a pool read positive; conditioning on the
pooled readouts keeps that selection out of the reference distribution, and leaving the single
readouts out of the posterior keeps the check from using them twice (a partial predictive check,
Bayarri & Berger 2000). Pools chosen adaptively from earlier pooled readouts are replicated from
the priors all the same (an approximation). The statistics:

- positive readouts of pools of that size (two-sided);
- positive pools whose members all read negative alone (every member tested alone, no positive;
  too many suggests a specificity lower than the file says);
- negative pools with a member that read positive alone (too many suggests a sensitivity in such
  pools lower than the file says, e.g. a stronger dilution effect).

Each gets a posterior predictive p-value (mid-p: P(T_rep > T_obs) + P(T_rep = T_obs) / 2). The
overall p-value is that of the smallest of them, referred to the same statistic over the
replicates, so looking at many checks does not by itself raise an alarm. Below 0.01 a warning names
what does not fit and suggests refitting the assay with ``bayespool calibrate`` on these readouts.
Posterior predictive p-values are conservative (the data are used twice), so a warning is a strong
signal and no warning is no proof of fit.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numba import njit

ALARM = 0.01           # warn below this overall p-value
DEFAULT_DRAWS = 1000    # replicates (fewer on large runs, see _n_draws)
MEMORY = 1e8            # bytes of status draws held at once

KINDS = ("positive_readouts", "positive_pool_negative_members", "negative_pool_positive_member")


@njit(cache=True)
def _statistics(r, r_design, reads, pool_ptr, pool_members, cls, kind_ok, single_of, ind_reads,
                alone, out):
    """out[c, 0..2] += the three statistics of pool-size class c: positive readouts ``r``; the
    discordances of single readouts ``r`` with the pooled readouts ``r_design``. ``alone[t]``:
    members of pool t read alone (a pool with none cannot be discordant and is skipped)."""
    n = len(ind_reads)
    ind_pos = np.zeros(n, dtype=np.int64)
    for t in range(len(reads)):
        if reads[t] > 0 and single_of[t] >= 0:
            ind_pos[single_of[t]] += r[t]
    for t in range(len(reads)):
        if reads[t] == 0:
            continue
        c = cls[t]
        out[c, 0] += r[t]
        if not kind_ok[t] or alone[t] == 0:
            continue
        if r_design[t] > 0:
            if alone[t] < pool_ptr[t + 1] - pool_ptr[t]:
                continue
            every = True
            for j in range(pool_ptr[t], pool_ptr[t + 1]):
                i = pool_members[j]
                if ind_reads[i] == 0 or ind_pos[i] > 0:
                    every = False
                    break
            if every:
                out[c, 1] += 1
        else:
            for j in range(pool_ptr[t], pool_ptr[t + 1]):
                if ind_pos[pool_members[j]] > 0:
                    out[c, 2] += 1
                    break


@njit(cache=True)
def _prior_counts(prior, rate, sample_ptr, sample_pools, d):
    """d[t] = positive members of pool t in one draw of the statuses from the priors.

    Candidates come at geometric gaps with probability ``rate`` (the largest prior) and are kept
    with probability prior_i / rate (thinning): the same independent Bernoulli(prior_i) statuses
    in time proportional to the expected number of positives, not to the number of specimens."""
    d[:] = 0
    n = len(prior)
    i = -1
    while True:
        i += np.random.geometric(rate) if rate < 1.0 else 1
        if i >= n:
            break
        if rate < 1.0 and np.random.random() * rate >= prior[i]:
            continue
        for a in range(sample_ptr[i], sample_ptr[i + 1]):
            d[sample_pools[a]] += 1


@njit(cache=True)
def _replicates(n_draws, prior, sample_ptr, sample_pools, x_given, seed, r_obs, reads, q_ptr, q,
                pool_ptr, pool_members, cls, kind_ok, single_of, ind_reads, alone, out):
    """out[s]: statistics of replicate s. Pooled readouts (pools of several) are drawn from
    statuses drawn from the priors; single readouts from ``x_given[s]`` (statuses given the pooled
    readouts), and their discordances are counted against the observed pooled readouts
    ``r_obs``."""
    np.random.seed(seed)
    r = np.zeros(len(reads), dtype=np.int64)
    d_prior = np.zeros(len(reads), dtype=np.int64)
    rate = prior.max() if len(prior) else 0.0
    for s in range(n_draws):
        _prior_counts(prior, rate, sample_ptr, sample_pools, d_prior)
        for t in range(len(reads)):
            r[t] = 0
            if reads[t] == 0:
                continue
            if single_of[t] >= 0:
                d = x_given[s, single_of[t]]
            else:
                d = d_prior[t]
            qt = q[q_ptr[t] + d]
            hits = 0
            for _ in range(reads[t]):  # replicates of one pool are few: Bernoulli draws
                hits += np.random.random() < qt
            r[t] = hits
        _statistics(r, r_obs, reads, pool_ptr, pool_members, cls, kind_ok, single_of, ind_reads,
                    alone, out[s])


def _mid_p_upper(rep: np.ndarray, obs: np.ndarray) -> np.ndarray:
    """Per column: P(rep > obs) + P(rep = obs) / 2 over the rows of ``rep``."""
    return (rep > obs).mean(axis=0) + 0.5 * (rep == obs).mean(axis=0)


def _p_values(rep: np.ndarray, obs: np.ndarray, two_sided: np.ndarray) -> np.ndarray:
    up = _mid_p_upper(rep, obs)
    down = (rep < obs).mean(axis=0) + 0.5 * (rep == obs).mean(axis=0)
    return np.where(two_sided, np.minimum(1.0, 2 * np.minimum(up, down)), up)


def _replicate_p_values(rep: np.ndarray, two_sided: np.ndarray) -> np.ndarray:
    """Each replicate's p-values against all replicates (the reference for the overall p)."""
    s = len(rep)
    srt = np.sort(rep, axis=0)
    out = np.empty(rep.shape)
    for c in range(rep.shape[1]):
        below = np.searchsorted(srt[:, c], rep[:, c], side="left")
        upto = np.searchsorted(srt[:, c], rep[:, c], side="right")
        equal = upto - below
        up = (s - upto + 0.5 * equal) / s
        down = (below + 0.5 * equal) / s
        out[:, c] = np.minimum(1.0, 2 * np.minimum(up, down)) if two_sided[c] else up
    return out


@dataclass
class ModelCheck:
    """The check's result: ``checks`` (one dict per pool size and statistic), ``p_value`` (overall),
    ``warnings`` and ``draws`` (replicates used)."""

    p_value: float
    checks: list
    warnings: list = field(default_factory=list)
    draws: int = 0
    notes: list = field(default_factory=list)

    @property
    def failed(self) -> bool:
        return self.p_value < ALARM

    def summary(self) -> dict:
        """The ``"model_check"`` entry of ``--json``."""
        return {"p_value": self.p_value, "checks": self.checks, "warnings": self.warnings,
                "draws": self.draws, "alarm_below": ALARM, "notes": self.notes,
                "method": "posterior predictive check (Gelman, Meng & Stern 1996), mid-p"}


def _describe(kind: str, k: int) -> str:
    if kind == "positive_readouts":
        return f"positive readouts of pools of {k}"
    if kind == "positive_pool_negative_members":
        return f"positive pools of {k} whose members all read negative alone"
    return f"negative pools of {k} with a member that read positive alone"


def _hint(kind: str, observed: float, expected: float, k: int) -> str:
    if kind == "positive_pool_negative_members":
        return "the specificity may be lower than the assay file says"
    if kind == "negative_pool_positive_member":
        return (f"the sensitivity in pools of {k} may be lower than the assay file says "
                "(a stronger dilution effect), or the specificity of single tests lower")
    if observed > expected:
        return ("the specificity may be lower than the assay file says, or the prevalence higher "
                "than the priors")
    return f"the sensitivity in pools of {k} may be lower than the assay file says"


def _n_draws(n_samples: int, draws: int | None) -> int:
    if draws is not None:
        return int(draws)
    return int(max(100, min(DEFAULT_DRAWS, MEMORY // max(n_samples, 1))))


def _given_pooled(run, assay, single, alone_reads, n_draws, rng, notes) -> np.ndarray:
    """Joint draws of the statuses given the readouts of pools of several specimens only (the
    single readouts left out), draws x specimens.

    Only the specimens read alone are used. The posterior factorises over linked groups, so the
    groups without such a specimen are cut loose (their pooled readouts dropped) before decoding:
    the draws of the specimens read alone are the same in distribution, at the cost of the groups
    that hold them."""
    from dataclasses import replace

    from .decoders import decode
    from .decoders.graph import components
    from .planning.draws import posterior_draws
    pos = np.where(single, 0, run.n_positive)
    neg = np.where(single, 0, run.n_negative)
    label = components(replace(run, n_positive=pos, n_negative=neg, notes=[])).sample_label
    wanted = np.zeros(label.max() + 1 if len(label) else 0, dtype=bool)
    wanted[label[alone_reads > 0]] = True
    size = run.pool_size
    first = run.pool_members[run.pool_ptr[:-1][size > 0]]
    keep = np.zeros(run.n_pools, dtype=bool)
    keep[size > 0] = wanted[label[first]]
    pooled = replace(run, n_positive=np.where(keep, pos, 0), n_negative=np.where(keep, neg, 0),
                     notes=[])
    post = decode(pooled, assay, method="auto", seed=int(rng.integers(2**31)),
                  expectations=False, model_check=False)
    x = posterior_draws(pooled, assay, post, n_draws, rng, notes, every_group=True)
    return np.ascontiguousarray(x)


def check_model(run, assay, *, draws: int | None = None, seed=None) -> ModelCheck:
    """Predictive check of ``run``'s readouts under ``assay``.

    Parameters
    ----------
    run, assay
        The run and the assay model to check.
    draws
        Replicated data sets (default 1000, fewer for runs above 100,000 specimens so that the
        status draws stay within 100 MB).
    seed
        Makes the replicates reproducible.

    Returns
    -------
    ModelCheck
    """
    rng = np.random.default_rng(seed)
    reads = run.pool_reads.astype(np.int64)
    read = reads > 0
    size = run.pool_size.astype(np.int64)
    if not read.any():
        return ModelCheck(1.0, [], [], 0, ["no readouts: nothing to check"])
    sizes = np.unique(size[read])
    cls = np.searchsorted(sizes, size).astype(np.int64)
    cls[~read] = 0
    single = read & (size == 1)
    single_of = np.full(run.n_pools, -1, dtype=np.int64)
    single_of[single] = run.pool_members[run.pool_ptr[:-1][single]]
    ind_reads = np.bincount(single_of[single], weights=reads[single],
                            minlength=run.n_samples).astype(np.int64)
    kind_ok = read & (size > 1)
    q_ptr = np.zeros(run.n_pools + 1, dtype=np.int64)
    np.cumsum(size + 1, out=q_ptr[1:])
    owner = np.repeat(np.arange(run.n_pools), size + 1)
    d = np.arange(int(q_ptr[-1])) - q_ptr[owner]
    q = np.zeros(len(d))
    rows = read[owner]
    q[rows] = assay.positive_probability(size[owner][rows], d[rows])
    r_obs = run.n_positive.astype(np.int64)
    member_pool = np.repeat(np.arange(run.n_pools), size)
    alone = np.bincount(member_pool, weights=ind_reads[run.pool_members] > 0,
                        minlength=run.n_pools).astype(np.int64)  # members of each pool read alone
    obs = np.zeros((len(sizes), 3), dtype=np.int64)
    _statistics(r_obs, r_obs, reads, run.pool_ptr, run.pool_members, cls, kind_ok, single_of,
                ind_reads, alone, obs)
    n_draws = _n_draws(run.n_samples, draws)
    notes: list = []
    if single.any():
        x_given = _given_pooled(run, assay, single, ind_reads, n_draws, rng, notes)
    else:  # nothing is read alone: no draws given the pooled readouts are needed
        x_given = np.zeros((n_draws, 0), dtype=np.uint8)
    rep = np.zeros((n_draws, len(sizes), 3), dtype=np.int64)
    _replicates(n_draws, np.ascontiguousarray(run.prior, dtype=float), run.sample_ptr,
                run.sample_pools, x_given, int(rng.integers(2**31)), r_obs, reads, q_ptr, q,
                run.pool_ptr, run.pool_members, cls, kind_ok, single_of, ind_reads, alone, rep)
    # the checks that can vary: a discordance needs pools of several members with single tests
    has_single = np.bincount(cls[kind_ok], weights=alone[kind_ok] > 0, minlength=len(sizes)) > 0
    multi_all = np.bincount(cls[kind_ok], weights=alone[kind_ok] == size[kind_ok],
                            minlength=len(sizes)) > 0
    cols, meta = [], []
    for c, k in enumerate(sizes):
        cols.append((c, 0))
        meta.append((KINDS[0], int(k)))
        if k > 1 and multi_all[c]:
            cols.append((c, 1))
            meta.append((KINDS[1], int(k)))
        if k > 1 and has_single[c]:
            cols.append((c, 2))
            meta.append((KINDS[2], int(k)))
    ci = np.array([c for c, _ in cols])
    ki = np.array([j for _, j in cols])
    rep2 = rep[:, ci, ki].astype(float)
    obs2 = obs[ci, ki].astype(float)
    two = ki == 0
    p = _p_values(rep2, obs2, two)
    rep_p = _replicate_p_values(rep2, two)
    overall = float(_mid_p_upper(-rep_p.min(axis=1)[:, None], -np.array([p.min()]))[0])
    checks = []
    for j, (kind, k) in enumerate(meta):
        checks.append({"pool_size": k, "statistic": kind, "description": _describe(kind, k),
                       "observed": int(obs2[j]), "expected": float(rep2[:, j].mean()),
                       "p_value": float(p[j])})
    warnings = []
    if overall < ALARM:
        worst = [j for j in np.argsort(p) if p[j] < ALARM] or [int(np.argmin(p))]
        for j in worst[:4]:
            c = checks[j]
            warnings.append(f"WARNING: the readouts do not fit the assay model (overall "
                            f"p = {overall:.2g}): {c['description']}: {c['observed']} observed, "
                            f"{c['expected']:.1f} expected (p = {c['p_value']:.2g}): "
                            f"{_hint(c['statistic'], c['observed'], c['expected'], k=c['pool_size'])}"
                            "; refit the assay on these readouts (bayespool calibrate --layout "
                            "... --readouts ...) or check the assay file")
    return ModelCheck(overall, checks, warnings, n_draws, notes)
