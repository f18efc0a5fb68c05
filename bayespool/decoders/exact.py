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
            mask = g ^ (g >> 1)
            ones = 0
            for b in range(m):  # set bits in increasing order, as every sum has always run
                if (mask >> b) & 1:
                    acc[b] += w
                    ones += 1
            cnt[ones] += w
        log_z[c] = top + np.log(z)
        for b in range(m):
            prob[csamples[s0 + b]] = acc[b] / z
        for b in range(m + 1):
            counts[count_ptr[c] + b] = cnt[b] / z


@njit(cache=True)
def _signatures(comp_list, csptr, csamples, cpptr, cpools, sample_ptr, sample_pools, lik_ptr,
                loglik, log_p, log_q):
    """Everything the enumeration of each listed component reads, flattened in the order it reads
    it (sizes, priors, each specimen's read pools as local indices, each pool's log L): two
    components with equal signatures give bit-identical results."""
    n_pools = len(lik_ptr) - 1
    local = np.full(n_pools, -1, dtype=np.int64)
    ptr = np.zeros(len(comp_list) + 1, dtype=np.int64)
    for pass_ in range(2):
        if pass_ == 1:
            out = np.empty(ptr[-1])
        for ci in range(len(comp_list)):
            c = comp_list[ci]
            s0, s1, p0, p1 = csptr[c], csptr[c + 1], cpptr[c], cpptr[c + 1]
            for a in range(p0, p1):
                local[cpools[a]] = a - p0
            k = ptr[ci] if pass_ == 1 else 0
            if pass_ == 1:
                out[k] = s1 - s0
                out[k + 1] = p1 - p0
            k += 2
            for b in range(s0, s1):
                i = csamples[b]
                if pass_ == 1:
                    out[k] = log_p[i]
                    out[k + 1] = log_q[i]
                k += 3
                n_read = 0
                for a in range(sample_ptr[i], sample_ptr[i + 1]):
                    j = local[sample_pools[a]]
                    if j >= 0:
                        if pass_ == 1:
                            out[k] = j
                        k += 1
                        n_read += 1
                if pass_ == 1:
                    out[k - n_read - 1] = n_read
            for a in range(p0, p1):
                t = cpools[a]
                if pass_ == 1:
                    out[k] = lik_ptr[t + 1] - lik_ptr[t]
                k += 1
                for v in range(lik_ptr[t], lik_ptr[t + 1]):
                    if pass_ == 1:
                        out[k] = loglik[v]
                    k += 1
            for a in range(p0, p1):
                local[cpools[a]] = -1
            if pass_ == 0:
                ptr[ci + 1] = ptr[ci] + k
    return ptr, out


class ExactMemo:
    """What enumerations of components found, kept across decodes and draws of a growing run.

    The closed loop decodes and samples the same run again after every round, while most of its
    components are untouched by the new tests (and many are alike: every negative pool of 16 at one
    prevalence). Entries are keyed by everything an enumeration reads (:func:`_signatures`), so a
    remembered result is bit-identical to enumerating again. Both stores are bounded: a full one
    is emptied.
    """

    MARGINALS_LIMIT = 50_000      # components
    CDF_LIMIT = 2 ** 23           # doubles of cumulative state weights (64 MiB)

    def __init__(self):
        self.marginals: dict = {}   # signature -> (probabilities, log Z, count distribution)
        self.cdfs: dict = {}        # signature -> cumulative state weights (Gray-code order)
        self.cdf_size = 0

    def keys(self, selected, graph) -> list[bytes]:
        sig_ptr, sig = _signatures(selected, *graph)
        return [sig[sig_ptr[j]:sig_ptr[j + 1]].tobytes() for j in range(len(selected))]

    def remember_cdf(self, key: bytes, cdf: np.ndarray) -> None:
        if self.cdf_size + len(cdf) > self.CDF_LIMIT:
            self.cdfs.clear()
            self.cdf_size = 0
        if len(cdf) <= self.CDF_LIMIT:
            self.cdfs[key] = cdf
            self.cdf_size += len(cdf)


def check_component_sizes(comps: Components, selected: np.ndarray, limit: int = EXACT_LIMIT):
    sizes = comps.sizes[selected]
    if len(sizes) and sizes.max() > limit:
        big = int(np.argmax(sizes))
        raise InputError(f"a connected group of {int(sizes[big])} samples linked through shared pools "
                         f"is above the exact decoder's limit of {limit} samples (2^{limit} states); "
                         "use method bp or gibbs, or auto", parameters=("method",))


def decode_exact(run, lik_ptr, loglik, comps: Components, selected=None, limit: int = EXACT_LIMIT,
                 memo: ExactMemo | None = None):
    """Exact marginals for the selected components (all by default).

    ``memo`` (an :class:`ExactMemo` kept by the caller across decodes, as the closed loop does)
    remembers each
    enumerated component by everything its enumeration reads (:func:`_signatures`); a component
    met again (untouched by new tests, or identical to one seen before) is not enumerated again,
    and its results are bit-identical to enumerating it.

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
    graph = (comps.sample_ptr, comps.samples, comps.pool_ptr, comps.pools, run.sample_ptr,
             run.sample_pools, lik_ptr, loglik, log_p, log_q)
    if memo is None:
        _enumerate(selected, *graph, count_ptr, prob, log_z, counts)
    else:
        _enumerate_remembered(memo, selected, graph, comps, count_ptr, prob, log_z, counts)
    bad = selected[np.isneginf(log_z[selected])]
    if len(bad):
        raise impossible(run, comps.pools_of(int(bad[0])))
    return prob, log_z, count_ptr, counts


def _enumerate_remembered(memo: ExactMemo, selected, graph, comps, count_ptr, prob, log_z,
                          counts):
    """_enumerate for the components ``memo`` does not know; the others copied from it."""
    csptr, csamples = comps.sample_ptr, comps.samples
    keys = memo.keys(selected, graph)
    known_ = memo.marginals
    new = np.array([j for j, k in enumerate(keys) if k not in known_], dtype=np.int64)
    if len(new):
        _enumerate(selected[new], *graph, count_ptr, prob, log_z, counts)
        if len(known_) + len(new) > memo.MARGINALS_LIMIT:
            known_.clear()
    for j, key in enumerate(keys):
        c = selected[j]
        own = csamples[csptr[c]:csptr[c + 1]]
        cnt = slice(count_ptr[c], count_ptr[c + 1])
        known = known_.get(key)
        if known is None:
            known_[key] = (prob[own].copy(), float(log_z[c]), counts[cnt].copy())
        else:
            prob[own], log_z[c], counts[cnt] = known


def impossible(run, pools) -> ImpossibleEvidenceError:
    """The error for readouts that no status vector explains, naming the pools involved."""
    ids = [str(run.pool_ids[t]) for t in pools[:6]]
    more = f" and {len(pools) - 6} more" if len(pools) > 6 else ""
    where = run.sources.get("readouts")
    return ImpossibleEvidenceError(
        f"impossible evidence: the readouts of pools {', '.join(ids)}{more} cannot be explained by "
        "any status of their samples under this assay (a sensitivity or specificity of 1 rules "
        "out every combination); check the readouts or the assay file", where)
