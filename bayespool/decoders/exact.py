"""Exact posterior by enumerating every status vector of each connected component.

States are visited in Gray-code order, so each step flips one specimen and updates only the positive
counts of that specimen's pools: a state costs the flipped specimen's number of pools plus the
accumulation. The walk stores every state's log weight (shared with the exact sampler in
:mod:`bayespool.decoders.exact_sample`); pools whose likelihood is zero (Se = 1 or Sp = 1) are counted
rather than summed, so hard constraints are exact and never NaN. Marginals are then accumulated
against the largest weight.
Besides the marginals it returns each component's log evidence and the distribution of its number of
positive specimens.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from ..errors import ImpossibleEvidenceError, InputError
from .graph import Components

EXACT_LIMIT = 22  # largest component enumerated: 2**22 = 4.2 million states


@njit(cache=True)
def _state_log_weights(s0, m, csamples, cpools_a, cpools_b, cpools, sample_ptr, sample_pools,
                       lik_ptr, loglik, log_p, log_q, d, is_read, out):
    """Log weight of every state of one component; out[g] is the state with mask g ^ (g >> 1)."""
    for a in range(cpools_a, cpools_b):
        is_read[cpools[a]] = True
    finite = 0.0
    n_inf = 0
    for a in range(cpools_a, cpools_b):
        v = loglik[lik_ptr[cpools[a]]]
        if v == -np.inf:
            n_inf += 1
        else:
            finite += v
    prior_sum = 0.0
    for b in range(m):
        prior_sum += log_q[csamples[s0 + b]]
    mask = np.int64(0)
    n_states = np.int64(1) << m
    for g in range(n_states):
        if g > 0:
            j = 0
            while ((g >> j) & 1) == 0:
                j += 1
            i = csamples[s0 + j]
            up = ((mask >> j) & 1) == 0
            mask ^= np.int64(1) << j
            if up:
                prior_sum += log_p[i] - log_q[i]
            else:
                prior_sum += log_q[i] - log_p[i]
            for a in range(sample_ptr[i], sample_ptr[i + 1]):
                t = sample_pools[a]
                if not is_read[t]:
                    continue
                old = loglik[lik_ptr[t] + d[t]]
                d[t] += 1 if up else -1
                new = loglik[lik_ptr[t] + d[t]]
                if old == -np.inf:
                    n_inf -= 1
                else:
                    finite -= old
                if new == -np.inf:
                    n_inf += 1
                else:
                    finite += new
        out[g] = -np.inf if n_inf > 0 else prior_sum + finite
    for a in range(cpools_a, cpools_b):
        d[cpools[a]] = 0
        is_read[cpools[a]] = False


@njit(cache=True)
def _component_log_weights(c, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools, lik_ptr,
                           loglik, log_p, log_q, d, is_read):
    """Log weights of every state of component ``c`` (index g: Gray-code state g ^ (g >> 1))."""
    s0 = csptr[c]
    m = csptr[c + 1] - s0
    lw = np.empty(np.int64(1) << m)
    _state_log_weights(s0, m, csamples, cpptr[c], cpptr[c + 1], cpools, sample_ptr,
                       sample_pools, lik_ptr, loglik, log_p, log_q, d, is_read, lw)
    return s0, m, lw


@njit(cache=True)
def _enumerate(comp_list, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools, lik_ptr,
               loglik, log_p, log_q, count_ptr, prob, log_z, counts):
    """Marginals, log evidence and count distribution of every listed component."""
    n_pools = len(lik_ptr) - 1
    d = np.zeros(n_pools, dtype=np.int32)
    is_read = np.zeros(n_pools, dtype=np.bool_)
    for ci in range(len(comp_list)):
        c = comp_list[ci]
        s0, m, lw = _component_log_weights(c, csptr, csamples, cpptr, cpools, sample_ptr,
                                           sample_pools, lik_ptr, loglik, log_p, log_q, d,
                                           is_read)
        n_states = len(lw)
        top = lw.max()
        if top == -np.inf:
            log_z[c] = -np.inf
            for b in range(m):
                prob[csamples[s0 + b]] = np.nan
            continue
        acc = np.zeros(m)
        cnt = np.zeros(m + 1)
        z = 0.0
        for g in range(n_states):
            if lw[g] == -np.inf:
                continue
            w = np.exp(lw[g] - top)
            z += w
            rest = g ^ (g >> 1)
            ones = 0
            while rest:
                low = rest & -rest
                b = 0
                while (low >> b) != 1:
                    b += 1
                acc[b] += w
                ones += 1
                rest ^= low
            cnt[ones] += w
        log_z[c] = top + np.log(z)
        for b in range(m):
            prob[csamples[s0 + b]] = acc[b] / z
        for b in range(m + 1):
            counts[count_ptr[c] + b] = cnt[b] / z


def check_component_sizes(comps: Components, selected: np.ndarray, limit: int = EXACT_LIMIT):
    sizes = comps.sizes[selected]
    if len(sizes) and sizes.max() > limit:
        big = int(np.argmax(sizes))
        raise InputError(f"a connected group of {int(sizes[big])} samples linked through shared pools "
                         f"is above the exact decoder's limit of {limit} samples (2^{limit} states); "
                         "use method bp or gibbs, or auto", parameters=("method",))


def decode_exact(run, lik_ptr, loglik, comps: Components, selected=None, limit: int = EXACT_LIMIT):
    """Exact marginals for the selected components (all by default).

    Returns (prob, log_z per component, count_ptr, counts): the components' count distributions are
    ``counts[count_ptr[c]:count_ptr[c+1]]`` (length size + 1). Raises ImpossibleEvidenceError when a
    component's readouts have zero probability under the assay.
    """
    if selected is None:
        selected = np.arange(comps.n_components)
    selected = np.asarray(selected, dtype=np.int64)
    check_component_sizes(comps, selected, limit)
    prior = run.prior
    log_p, log_q = np.log(prior), np.log1p(-prior)
    count_ptr = np.zeros(comps.n_components + 1, dtype=np.int64)
    np.cumsum(comps.sizes + 1, out=count_ptr[1:])
    prob = np.array(prior, dtype=float)
    log_z = np.zeros(comps.n_components)
    counts = np.zeros(int(count_ptr[-1]))
    _enumerate(selected, comps.sample_ptr, comps.samples, comps.pool_ptr, comps.pools,
               run.sample_ptr, run.sample_pools, lik_ptr, loglik, log_p, log_q, count_ptr, prob,
               log_z, counts)
    bad = selected[np.isneginf(log_z[selected])]
    if len(bad):
        raise impossible(run, comps.pools_of(int(bad[0])))
    return prob, log_z, count_ptr, counts


def impossible(run, pools) -> ImpossibleEvidenceError:
    """The error for readouts that no status vector explains, naming the pools involved."""
    ids = [str(run.pool_ids[t]) for t in pools[:6]]
    more = f" and {len(pools) - 6} more" if len(pools) > 6 else ""
    where = run.sources.get("readouts")
    return ImpossibleEvidenceError(
        f"impossible evidence: the readouts of pools {', '.join(ids)}{more} cannot be explained by "
        "any status of their samples under this assay (a sensitivity or specificity of 1 rules "
        "out every combination); check the readouts or the assay file", where)
