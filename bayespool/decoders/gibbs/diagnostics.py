"""Convergence diagnostics per quantity: rank-normalised split R-hat, bulk ESS, MCSE of the mean.

Vehtari, Gelman, Simpson, Carpenter & Burkner (2021), Rank-normalization, folding, and localization:
an improved R-hat for assessing convergence of MCMC, Bayesian Analysis 16(2), 667-718. Chains are
split in halves; values are replaced by normal scores of their pooled ranks (Blom's offset 3/8);
R-hat is the larger of the bulk and the folded (|x - median|) values; the effective sample size uses
the autocorrelations combined across chains and Geyer's initial monotone sequence.

Every function takes ``draws`` of shape (chains, draws) or (chains, draws, quantities) and works on
all quantities at once. A quantity that is constant over every draw has R-hat 1 and an ESS equal to
the number of draws (nothing varies, so nothing is unconverged).
"""
from __future__ import annotations

import numpy as np
from scipy.fft import next_fast_len
from scipy.special import ndtri
from numba import njit

__all__ = ["rhat", "ess", "ess_mean", "mcse", "rhat_ess"]


def _as3d(draws) -> tuple[np.ndarray, bool]:
    a = np.asarray(draws, dtype=float)
    if a.ndim == 1:
        a = a[None, :]
    squeeze = a.ndim == 2
    if squeeze:
        a = a[:, :, None]
    if a.ndim != 3:
        raise ValueError("draws must have shape (chains, draws[, quantities])")
    return a, squeeze


def _out(values, squeeze):
    return float(values[0]) if squeeze else values


def split_chains(a: np.ndarray) -> np.ndarray:
    """Each chain's first and last halves as two chains (the middle draw of an odd chain dropped)."""
    half = a.shape[1] // 2
    return np.concatenate([a[:, :half], a[:, a.shape[1] - half:]], axis=0)


def average_ranks(a: np.ndarray) -> np.ndarray:
    """Ranks 1..N down each column of a 2-D array, ties sharing their average rank."""
    b = np.ascontiguousarray(np.asarray(a).T)  # sort along contiguous rows
    N = b.shape[1]
    idx = np.argsort(b, axis=1)
    srt = np.take_along_axis(b, idx, axis=1)
    pos = np.broadcast_to(np.arange(N), srt.shape)
    starts = np.ones(srt.shape, dtype=bool)
    starts[:, 1:] = srt[:, 1:] != srt[:, :-1]
    ends = np.ones(srt.shape, dtype=bool)
    ends[:, :-1] = starts[:, 1:]
    first = np.maximum.accumulate(np.where(starts, pos, 0), axis=1)
    last = np.minimum.accumulate(np.where(ends, pos, N)[:, ::-1], axis=1)[:, ::-1]
    ranks = np.empty(srt.shape)
    np.put_along_axis(ranks, idx, (first + last) / 2.0 + 1.0, axis=1)
    return ranks.T


def z_scale(a: np.ndarray) -> np.ndarray:
    """Normal scores of the ranks pooled over chains and draws, per quantity."""
    c, n, m = a.shape
    ranks = average_ranks(a.reshape(c * n, m))
    return ndtri((ranks - 0.375) / (c * n + 0.25)).reshape(c, n, m)


def _constant(a: np.ndarray) -> np.ndarray:
    flat = a.reshape(-1, a.shape[2])
    return (flat.max(axis=0) - flat.min(axis=0)) < np.finfo(float).resolution


def _rhat_basic(a: np.ndarray) -> np.ndarray:
    n = a.shape[1]
    between = n * a.mean(axis=1).var(axis=0, ddof=1)
    within = a.var(axis=1, ddof=1).mean(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt((between / within + n - 1) / n)


def rhat_ess(draws):
    """(R-hat, bulk ESS) together, ranking the split chains once for both."""
    a, squeeze = _as3d(draws)
    _check_length(a)
    s = split_chains(a)
    z = z_scale(s)
    bulk = _rhat_basic(z)
    tail = _rhat_basic(z_scale(np.abs(s - np.median(s.reshape(-1, s.shape[2]), axis=0))))
    r = np.maximum(bulk, tail)
    e = _ess_basic(z)
    const = _constant(a)
    r[const] = 1.0
    e[const] = a.shape[0] * a.shape[1]
    return _out(r, squeeze), _out(e, squeeze)


def rhat(draws):
    """Rank-normalised split R-hat: max of bulk and folded R-hat (chains of 4+ draws).

    One chain is allowed (its halves are compared); ArviZ asks for two.
    """
    a, squeeze = _as3d(draws)
    _check_length(a)
    s = split_chains(a)
    bulk = _rhat_basic(z_scale(s))
    tail = _rhat_basic(z_scale(np.abs(s - np.median(s.reshape(-1, s.shape[2]), axis=0))))
    out = np.maximum(bulk, tail)
    out[_constant(a)] = 1.0
    return _out(out, squeeze)


def _autocov(a: np.ndarray) -> np.ndarray:
    """Autocovariance at every lag per chain and quantity (biased, divided by n), by FFT."""
    n = a.shape[1]
    size = next_fast_len(2 * n)
    centred = a - a.mean(axis=1, keepdims=True)
    f = np.fft.rfft(centred, n=size, axis=1)
    return np.fft.irfft(f * np.conjugate(f), n=size, axis=1)[:, :n] / n


def _ess_basic(a: np.ndarray) -> np.ndarray:
    c, n, m = a.shape
    acov = _autocov(a)
    mean_var = acov[:, 0].mean(axis=0) * n / (n - 1.0)
    var_plus = mean_var * (n - 1.0) / n
    if c > 1:
        var_plus = var_plus + a.mean(axis=1).var(axis=0, ddof=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = 1.0 - (mean_var - acov.mean(axis=0)) / var_plus  # (n, m), rho[0] = 1
    rho[0] = 1.0
    total = c * n
    tau = _tau(np.ascontiguousarray(rho.T), n)
    tau = np.maximum(tau, 1.0 / np.log10(total))
    out = total / tau
    out[~np.isfinite(rho).all(axis=0)] = np.nan
    return out


@njit(cache=True)
def _tau(rho, n):
    """Integrated autocorrelation time of each row of ``rho`` (lags 0..n-1).

    Pair sums rho[2k] + rho[2k+1] are kept while positive (Geyer's initial positive sequence), made
    non-increasing (initial monotone sequence), and the last even lag added when positive, as in
    Vehtari et al. (2021), section 3.2 and appendix.
    """
    m = rho.shape[0]
    out = np.empty(m)
    kept = np.zeros(n + 2)
    for q in range(m):
        r = rho[q]
        kept[:] = 0.0
        kept[0] = 1.0
        even = 1.0
        odd = r[1] if n > 1 else 0.0
        kept[1] = odd
        t = 1
        while t < n - 3 and even + odd > 0.0:
            even = r[t + 1]
            odd = r[t + 2]
            if even + odd >= 0.0:
                kept[t + 1] = even
                kept[t + 2] = odd
            t += 2
        max_t = t - 2
        if even > 0.0:
            kept[max_t + 1] = even
        t = 1
        while t <= max_t - 2:
            if kept[t + 1] + kept[t + 2] > kept[t - 1] + kept[t]:
                kept[t + 1] = (kept[t - 1] + kept[t]) / 2.0
                kept[t + 2] = kept[t + 1]
            t += 2
        acc = 0.0
        for j in range(max_t + 1):
            acc += kept[j]
        out[q] = -1.0 + 2.0 * acc + kept[max_t + 1]
    return out


def ess(draws):
    """Bulk effective sample size: ESS of the rank-normalised split chains."""
    a, squeeze = _as3d(draws)
    _check_length(a)
    out = _ess_basic(z_scale(split_chains(a)))
    out[_constant(a)] = a.shape[0] * a.shape[1]
    return _out(out, squeeze)


def ess_mean(draws):
    """Effective sample size for the mean: ESS of the split chains on the original scale."""
    a, squeeze = _as3d(draws)
    _check_length(a)
    out = _ess_basic(split_chains(a))
    out[_constant(a)] = a.shape[0] * a.shape[1]
    return _out(out, squeeze)


def mcse(draws):
    """Monte Carlo standard error of the mean: sd / sqrt(ESS for the mean); 0 when constant."""
    a, squeeze = _as3d(draws)
    _check_length(a)
    sd = a.reshape(-1, a.shape[2]).std(axis=0, ddof=1)
    e = _ess_basic(split_chains(a))
    with np.errstate(divide="ignore", invalid="ignore"):
        out = sd / np.sqrt(e)
    out[_constant(a)] = 0.0
    return _out(out, squeeze)


def _check_length(a):
    if a.shape[1] < 4:
        raise ValueError("the effective sample size needs chains of at least 4 draws")
