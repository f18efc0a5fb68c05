"""Expected information gain of pooled readouts, estimated over joint posterior draws.

For a batch of readouts Y_1..Y_m, conditionally independent given the statuses x, the information
they carry about x is the mutual information I(Y; x) = H(Y) - E_x H(Y | x) (bits), with H(Y | x) =
sum_j H2(P(Y_j = 1 | x)) and P(Y_j = 1 | x) = 1 - Sp if no member of pool j is positive under x,
Se(k_j, d_j(x)) otherwise: the exact per-draw readout probability, dilution included. H(Y) is the
entropy of the mixture over draws, p(y) = sum_r w_r prod_j P(y_j | x_r), kept as a table of 2^m
outcomes by draws for the few tests that share linked specimens. This is Bayesian sequential
experimental design by expected information gain (Lindley 1956, On a measure of the information
provided by an experiment, Ann. Math. Statist. 27(4); for pooled tests see Cuturi, Teboul & Vert
2020, arXiv:2004.12508). The information of conditionally independent readouts is monotone and
submodular in the set of tests (Krause & Guestrin 2005, Near-optimal nonmyopic value of information
in graphical models, UAI), which the lazy greedy batch relies on.

Draws are stored specimens x draws (``xt[i, r]``, uint8) so that a pool's members are read along
contiguous rows; ``w`` are the draws' weights (summing to one).
"""
from __future__ import annotations

import numpy as np
from numba import njit

LOG2 = np.log(2.0)


def readout_table(assay, kmax: int) -> np.ndarray:
    """``q[k, d]`` = P(positive readout | pool size k, d positive members), d <= k <= kmax.

    Pool sizes the assay does not cover (a sensitivity table without them) are NaN.
    """
    q = np.full((kmax + 1, kmax + 1), np.nan)
    for k in range(1, kmax + 1):
        try:
            assay.sensitivity.check_pool_sizes(np.array([k]))
        except ValueError:
            continue
        q[k, :k + 1] = assay.positive_probability(np.full(k + 1, k), np.arange(k + 1))
    return q


@njit(cache=True)
def binary_entropy(p):
    """H2(p) in bits; exact 0 at p = 0 and p = 1."""
    if p <= 0.0 or p >= 1.0:
        return 0.0
    return -(p * np.log(p) + (1.0 - p) * np.log(1.0 - p)) / np.log(2.0)


@njit(cache=True)
def _xlog2x(a):
    return a * np.log(a) / np.log(2.0) if a > 0.0 else 0.0


@njit(cache=True)
def positive_counts(xt, members, counts):
    """counts[r] = number of positive members of the pool under draw r."""
    counts[:] = 0
    n_draws = xt.shape[1]
    for a in range(len(members)):
        row = members[a]
        for r in range(n_draws):
            counts[r] += xt[row, r]


@njit(cache=True)
def readout_probabilities(xt, members, qtab, out):
    """out[r] = P(positive readout | x_r) for the pool of ``members`` under each draw r."""
    counts = np.empty(xt.shape[1], dtype=np.int32)
    positive_counts(xt, members, counts)
    k = len(members)
    for r in range(len(out)):
        out[r] = qtab[k, counts[r]]


@njit(cache=True)
def single_information(xt, w, ptr, members, qtab):
    """(P(positive), information bits) of each candidate pool read once, with nothing else known.

    The readout probability depends on a draw only through its count of positive members, so the
    draws are first binned by that count (weights summed), then H2 is taken once per count.
    """
    n_cand = len(ptr) - 1
    p_pos = np.zeros(n_cand)
    info = np.zeros(n_cand)
    counts = np.empty(xt.shape[1], dtype=np.int32)
    hist = np.zeros(qtab.shape[0])
    for c in range(n_cand):
        k = ptr[c + 1] - ptr[c]
        positive_counts(xt, members[ptr[c]:ptr[c + 1]], counts)
        hist[:k + 1] = 0.0
        for r in range(len(counts)):
            hist[counts[r]] += w[r]
        mean = 0.0
        cond = 0.0
        for d in range(k + 1):
            if hist[d] > 0.0:
                mean += hist[d] * qtab[k, d]
                cond += hist[d] * binary_entropy(qtab[k, d])
        p_pos[c] = mean
        info[c] = binary_entropy(mean) - cond
    return p_pos, info


@njit(cache=True)
def conditional_entropy(q, w):
    """E_x H(Y | x) for one readout whose per-draw positive probability is q."""
    s = 0.0
    for r in range(len(q)):
        s += w[r] * binary_entropy(q[r])
    return s


@njit(cache=True)
def outcome_entropy(lik, w):
    """H(Y) for the outcome table lik[y, r] = P(y | x_r), p(y) = sum_r w_r lik[y, r]."""
    h = 0.0
    for y in range(lik.shape[0]):
        p = 0.0
        for r in range(lik.shape[1]):
            p += w[r] * lik[y, r]
        h -= _xlog2x(p)
    return h


@njit(cache=True)
def entropy_with(lik, w, q):
    """H(Y_B, Y_new) for the outcome table of B and one more readout with probabilities q."""
    h = 0.0
    for y in range(lik.shape[0]):
        a = 0.0
        b = 0.0
        for r in range(lik.shape[1]):
            v = w[r] * lik[y, r]
            a += v * q[r]
            b += v * (1.0 - q[r])
        h -= _xlog2x(a) + _xlog2x(b)
    return h


@njit(cache=True)
def extend(lik, q):
    """The outcome table with one more readout: rows 2y (negative) and 2y + 1 (positive)."""
    out = np.empty((2 * lik.shape[0], lik.shape[1]))
    for y in range(lik.shape[0]):
        for r in range(lik.shape[1]):
            out[2 * y, r] = lik[y, r] * (1.0 - q[r])
            out[2 * y + 1, r] = lik[y, r] * q[r]
    return out


@njit(cache=True)
def combine(lik_a, lik_b):
    """Outcome table of the union of two sets of readouts (per-draw product, outcomes crossed)."""
    na, nb = lik_a.shape[0], lik_b.shape[0]
    out = np.empty((na * nb, lik_a.shape[1]))
    for ya in range(na):
        for yb in range(nb):
            for r in range(lik_a.shape[1]):
                out[ya * nb + yb, r] = lik_a[ya, r] * lik_b[yb, r]
    return out


def _as_specimen_rows(draws) -> np.ndarray:
    return np.ascontiguousarray(np.asarray(draws, dtype=np.uint8).T)


def _weights(n_draws: int, weights) -> np.ndarray:
    if weights is None:
        return np.full(n_draws, 1.0 / n_draws)
    w = np.asarray(weights, dtype=float)
    return w / w.sum()


def joint_information(draws, pools, assay, weights=None) -> float:
    """Information (bits) that reading each pool of ``pools`` once carries about the statuses.

    ``draws``: (n_draws, n_samples) joint posterior draws (0/1); ``pools``: lists of specimen
    indices; ``weights``: optional weight per draw (uniform by default). Exact for the distribution
    the draws define; cost 2^len(pools) x draws, for checks and small batches.
    """
    xt = _as_specimen_rows(draws)
    w = _weights(xt.shape[1], weights)
    pools = [np.asarray(p, dtype=np.int64) for p in pools]
    qtab = readout_table(assay, max([len(p) for p in pools] + [1]))
    lik = np.ones((1, xt.shape[1]))
    cond = 0.0
    q = np.empty(xt.shape[1])
    for p in pools:
        readout_probabilities(xt, p, qtab, q)
        cond += conditional_entropy(q, w)
        lik = extend(lik, q)
    return float(outcome_entropy(lik, w) - cond)


def pool_information(draws, pool, assay, weights=None) -> tuple[float, float]:
    """(P(positive readout), information bits) of reading one pool once."""
    xt = _as_specimen_rows(draws)
    w = _weights(xt.shape[1], weights)
    members = np.asarray(pool, dtype=np.int64)
    qtab = readout_table(assay, max(len(members), 1))
    p_pos, info = single_information(xt, w, np.array([0, len(members)], dtype=np.int64), members,
                                     qtab)
    return float(p_pos[0]), float(info[0])
