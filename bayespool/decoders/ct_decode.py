"""Decoding under a ``[ct]`` assay: which group takes which decoder, and each specimen's Ct.

Per-pool likelihoods L_t[d] (:mod:`bayespool.ct_evidence`) integrate every pool's Cts on their own.
Where no specimen lies in two read pools (single pools, Dorfman's first stage) that is the exact
model, and the binary enumerator or belief propagation on those vectors is exact. Where specimens
are shared, their Ct links the pools: small groups take the joint enumeration of
:mod:`bayespool.decoders.ct_exact`; larger ones take belief propagation on the per-pool vectors, which
ignores that a specimen's Ct is shared (the result says so).

Each specimen above the negative threshold gets the posterior mean and 95 % interval of its
individual Ct given that it is positive: exact from the joint enumeration, otherwise approximate
(:func:`approximate_ct`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..ct import _logsumexp
from ..ct_evidence import PoolCtStats
from .ct_exact import (CT_EXACT_LIMIT, JOINT_LIMIT, ct_summary, decode_group, exact_grid,
                       grid_step)

# auto: total states enumerated jointly with Ct integrals (a Python loop over states)
CT_STATE_BUDGET = 1 << 15
CT_GIBBS_LIMIT = 5000   # auto: shared groups up to this many specimens go to the Ct sampler
GIBBS_SWEEPS = (2000, 16000)  # first and largest sweeps per chain (doubled until R-hat and ESS pass)
SHARED_NOTE = ("belief propagation on per-pool Ct likelihoods ignores that a specimen's Ct is "
               "shared by its pools (each pool integrates its positives' Cts on its own)")


def shared_components(run, comps) -> np.ndarray:
    """Per component: does some specimen lie in two or more read pools?"""
    read = run.pool_read
    owner = np.repeat(read, run.pool_size)
    n_read = np.bincount(run.pool_members[owner], minlength=run.n_samples)
    shared = np.zeros(comps.n_components, dtype=bool)
    multi = np.flatnonzero(n_read >= 2)
    shared[comps.sample_label[multi]] = True
    return shared


def ct_choice(run, comps, method: str, choice):
    """Adjust the binary decoder choice for a Ct assay; returns (choice, notes).

    ``exact`` on a group with shared specimens means the joint Ct enumeration (limit
    :data:`CT_EXACT_LIMIT` specimens); ``auto`` sends such groups there while the total number of
    states stays within :data:`CT_STATE_BUDGET`, the rest to belief propagation.
    """
    shared = shared_components(run, comps)
    sizes = comps.sizes
    notes = []
    if method == "exact":
        big = shared & (sizes > CT_EXACT_LIMIT)
        if big.any():
            from ..errors import InputError
            raise InputError(f"a group of {int(sizes[big].max())} specimens linked through shared "
                             f"pools is above the exact Ct decoder's limit of {CT_EXACT_LIMIT}; "
                             "use `method` auto or bp")
    if method == "gibbs":
        choice.method[:] = "gibbs"
    if method == "auto":
        cand = np.flatnonzero(shared & (sizes <= CT_EXACT_LIMIT))
        cand = cand[np.argsort(sizes[cand], kind="stable")]
        within = np.cumsum(np.exp2(sizes[cand].astype(float))) <= CT_STATE_BUDGET
        choice.method[cand[within]] = "exact"
        choice.method[cand[~within]] = "bp"
        loopy = shared & (choice.method == "bp")
        choice.method[loopy & (sizes <= CT_GIBBS_LIMIT)] = "gibbs"
        rest = shared & (choice.method == "bp")
        if rest.any():
            notes.append(f"{int(rest.sum())} group(s) of specimens sharing pools are beyond the "
                         f"exact Ct decoder and the Ct sampler ({CT_GIBBS_LIMIT} specimens): "
                         + SHARED_NOTE)
    elif method == "bp" and shared.any():
        notes.append(SHARED_NOTE)
    return shared, notes


@dataclass(frozen=True, eq=False)
class CtShared:
    """What the Ct part decoders and :func:`finish_ct` share in one decode: the assay, which
    components share Cts (and the notes saying so), the pools' Ct statistics, and the ct_mean /
    ct_low / ct_high columns the decoders fill."""

    assay: object
    shared: np.ndarray
    notes: list
    stats: PoolCtStats
    columns: dict

    @classmethod
    def build(cls, run, assay, comps, method, choice) -> "CtShared":
        """From the run, with ``choice`` adjusted in place (:func:`ct_choice`)."""
        shared, notes = ct_choice(run, comps, method, choice)
        return cls(assay, shared, notes, PoolCtStats.from_run(run, assay.ct),
                   {name: np.full(run.n_samples, np.nan)
                    for name in ("ct_mean", "ct_low", "ct_high")})


def ct_exact_part(problem, selected, options):
    """Part decoder: joint Ct enumeration on shared groups, the binary enumerator elsewhere."""
    from . import DecodedPart, _exact_part, _samples_of
    run, lik_ptr, loglik, comps = problem.run, problem.lik_ptr, problem.loglik, problem.comps
    ct = options.ct
    assay, shared = ct.assay, ct.shared
    selected = np.asarray(selected, dtype=np.int64)
    plain = selected[~shared[selected]]
    joint = selected[shared[selected]]
    prob = np.array(run.prior, dtype=float)
    log_z = np.zeros(len(selected))
    parts = []
    if len(plain):
        p = _exact_part(problem, plain, options)
        prob[p.samples] = p.probability[p.samples]
        log_z[np.searchsorted(selected, plain)] = p.log_z
        parts.extend(p.count_parts)
    omitted = 0.0
    if len(joint):
        model = assay.ct
        stats = ct.stats
        nodes, log_w = exact_grid(model)
        cols = ct.columns
        for c in joint:
            samples = comps.samples_of(int(c))
            pr, marg, lz, counts, om = decode_group(model, run, stats, samples, comps.pools_of(int(c)),
                                            lik_ptr, loglik, nodes)
            prob[samples] = pr
            log_z[np.searchsorted(selected, c)] = lz
            omitted += om
            parts.append(counts)
            for j, s in enumerate(samples):
                if pr[j] >= options.negative_below and not np.isnan(marg[j, 0]):
                    cols["ct_mean"][s], cols["ct_low"][s], cols["ct_high"][s] = \
                        ct_summary(nodes, marg[j])
    part = DecodedPart("exact", selected, _samples_of(comps, selected), prob, log_z, parts)
    part.diagnostics = {"ct_joint_groups": int(len(joint)),
                        "ct_quadrature": "trapezoid rule on a uniform grid of individual Cts "
                                         f"(step {grid_step(assay.ct):.3g} cycles), shared Cts "
                                         "integrated jointly"}
    if omitted > 0:
        part.warnings.append(f"exact Ct decoding left out states where more than {JOINT_LIMIT} "
                             "positives share pools (prior probability "
                             f"{omitted:.2g} in all); it is exact up to them")
    return part


def ct_gibbs_part(problem, selected, options):
    """Part decoder: the Ct sampler (:mod:`bayespool.decoders.ct_gibbs`) on the given groups, sweeps
    doubled from 2000 until split R-hat <= 1.01 and ESS >= 400 on every specimen whose draws vary
    (or 16000 sweeps per chain, with a warning)."""
    from . import DecodedPart, _samples_of
    from .ct_gibbs import sample_ct
    from .gibbs.diagnostics import rhat_ess
    run, ct = problem.run, options.ct
    selected = np.asarray(selected, dtype=np.int64)
    specimens = np.sort(_samples_of(problem.comps, selected)).astype(np.int64)
    sweeps = GIBBS_SWEEPS[0]
    seed = options.seed
    while True:
        p, draws, nodes, hist = sample_ct(run, ct.assay, ct.stats, problem.lik_ptr,
                                          problem.loglik, specimens, chains=4, sweeps=sweeps,
                                          burn=sweeps // 4, seed=seed)
        r, e = rhat_ess(draws.astype(float))
        ok = bool(np.all(r <= 1.01) and np.all(e >= 400))
        if ok or sweeps >= GIBBS_SWEEPS[1]:
            break
        sweeps *= 2
    prob = np.array(run.prior, dtype=float)
    prob[specimens] = p
    cols = ct.columns
    with np.errstate(divide="ignore"):
        for j, i in enumerate(specimens):
            if p[j] >= options.negative_below and hist[j].sum() > 0:
                cols["ct_mean"][i], cols["ct_low"][i], cols["ct_high"][i] = \
                    ct_summary(nodes, np.log(hist[j]))
    part = DecodedPart("gibbs", selected, specimens, prob, converged=ok,
                       diagnostics={"sampler": "statuses and shared individual Cts jointly",
                                    "sweeps_per_chain": sweeps, "chains": 4,
                                    "max_rhat": float(np.max(r)), "min_ess": float(np.min(e))})
    if not ok:
        part.warnings.append(f"the Ct sampler did not reach R-hat <= 1.01 and ESS >= 400 within "
                             f"{sweeps} sweeps per chain (largest R-hat {np.max(r):.3f}, "
                             f"smallest ESS {np.min(e):.0f}); its probabilities are approximate")
    return part


def approximate_ct(model, run, stats: PoolCtStats, probability, specimens):
    """Posterior mean and 95 % interval of each listed specimen's Ct given that it is positive,
    approximately: each of its pools holds it plus at most one other positive, the others' statuses
    taken independent at their marginal probabilities (a second other positive is lumped with the
    first). Exact when the specimen is the only candidate in its pools."""
    nodes, log_w = exact_grid(model)
    s = model.cycles_per_doubling
    out = np.full((len(specimens), 3), np.nan)
    for r, i in enumerate(specimens):
        total = log_w.copy()
        for t in run.pools_of(int(i)):
            if stats.n_ct[t] + stats.n_none[t] + stats.n_unknown[t] == 0:
                continue
            others = [j for j in run.members(int(t)) if j != i]
            q = np.clip(probability[others], 0.0, 1.0)
            p_none = float(np.prod(1.0 - q))
            shift = s * math.log2(run.pool_size[t])
            args = (stats.n_ct[t], stats.sum_ct[t], stats.sum_ct2[t], stats.n_none[t],
                    stats.n_unknown[t])
            alone = model.log_readout_factor(nodes + shift, *args)
            if p_none > 1.0 - 1e-4:
                total += alone
                continue
            pair = model.log_readout_factor(model.combine(nodes[:, None], nodes[None, :]) + shift,
                                            *args)
            with_one = _logsumexp(pair + log_w[None, :], axis=1)
            total += np.logaddexp(math.log(max(p_none, 1e-300)) + alone,
                                  math.log1p(-p_none) + with_one)
        out[r] = ct_summary(nodes, total)
    return out


def finish_ct(post, run, assay, options, choice) -> None:
    """Add ct_mean/ct_low/ct_high to the posterior (exact where the joint enumeration ran,
    approximate elsewhere) and say how the Cts were used."""
    ct = options.ct
    cols = ct.columns
    lo = options.negative_below
    read = run.pool_read
    in_read = np.bincount(run.pool_members[np.repeat(read, run.pool_size)],
                          minlength=run.n_samples) > 0
    todo = np.flatnonzero((post.probability >= lo) & np.isnan(cols["ct_mean"]) & in_read)
    if len(todo):
        vals = approximate_ct(assay.ct, run, ct.stats, post.probability, todo)
        for a, name in enumerate(("ct_mean", "ct_low", "ct_high")):
            cols[name][todo] = vals[:, a]
    post.columns.update(cols)
    ignores = bool(np.any(ct.shared & (choice.method == "bp")))
    post.diagnostics["ct"] = {
        "model": assay.ct.describe(),
        "ignores_shared_ct": ignores,
        "shared_ct": SHARED_NOTE if ignores else "integrated jointly where specimens share pools "
                                                 "(exact enumeration or the Ct sampler)",
        "ct_interval": "exact from the joint enumeration, sampled by the Ct sampler, elsewhere "
                       "approximate (at most one other positive per pool, the others at their "
                       "marginals)",
    }
    post.warnings.extend(ct.notes)
