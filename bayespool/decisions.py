"""Calls from the posterior, by per-specimen thresholds or by batch targets, and what a batch can
expect of its calls.

Thresholds (the default): negative when P(positive) < ``negative_below``, positive when above
``positive_above``, inconclusive between. Batch targets control the posterior expected false
omission and false discovery of the whole batch (Mueller, Parmigiani, Robert & Rousseau 2004, JASA
99:990; Newton, Noueiry, Sarkar & Ahlquist 2004, Biostatistics 5:155): with p_i the posterior
probabilities,

- ``target_sensitivity`` S: the negative calls are the largest set of lowest-p specimens whose
  expected missed positives, the sum of their p_i, stay within (1 - S) times the batch's expected
  number of positives, the sum of all p_i;
- ``max_false_discovery`` F: the positive calls are the largest set of highest-p specimens whose
  expected false positives, the sum of their (1 - p_i), stay within F times their number.

A threshold given together with a target on the same side must agree with it (the stricter call
wins). A specimen in no read pool is ``untested``: its probability is its prior, and a prior never
decides a specimen.

The batch's expectations (missed positives among negative calls, false positives among positive
calls, the calls' sensitivity and false discovery rate) come with 95% intervals from the joint
posterior: per linked group the exact joint distribution of the counts by enumeration, convolved
across groups (groups are independent a posteriori); the sampler's joint draws where the Gibbs
sampler decoded; and, where belief propagation decoded a linked group, its marginals taken as
independent (an approximation the result names).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from .defaults import NEGATIVE_BELOW, POSITIVE_ABOVE

CALLS = ("negative", "inconclusive", "positive", "untested")
NEGATIVE, INCONCLUSIVE, POSITIVE, UNTESTED = 0, 1, 2, 3
SENSITIVITY_WARNING = 0.9  # warn when the calls' expected batch sensitivity is below this
LEVEL = 0.95


# ---- the rule
def _open_probability(value, name: str) -> float | None:
    from .validation import check_open_probability
    return None if value is None else check_open_probability(value, name)


@dataclass(frozen=True)
class DecisionRule:
    """Which rules call specimens negative and positive.

    A threshold left as None is the default (0.01 and 0.99) unless a target covers that side; a
    threshold given together with a target must agree with it.
    """

    negative_below: float | None = None
    positive_above: float | None = None
    target_sensitivity: float | None = None
    max_false_discovery: float | None = None

    def __post_init__(self):
        lo = _open_probability(self.negative_below, "negative_below")
        hi = _open_probability(self.positive_above, "positive_above")
        if lo is not None and hi is not None:
            from .validation import check_thresholds
            check_thresholds(lo, hi)
        object.__setattr__(self, "negative_below", lo)
        object.__setattr__(self, "positive_above", hi)
        object.__setattr__(self, "target_sensitivity",
                           _open_probability(self.target_sensitivity, "target_sensitivity"))
        object.__setattr__(self, "max_false_discovery",
                           _open_probability(self.max_false_discovery, "max_false_discovery"))

    @property
    def low(self) -> float | None:
        """The negative threshold in force (None when a target alone calls negatives)."""
        if self.negative_below is not None:
            return self.negative_below
        return NEGATIVE_BELOW if self.target_sensitivity is None else None

    @property
    def high(self) -> float | None:
        """The positive threshold in force (None when a target alone calls positives)."""
        if self.positive_above is not None:
            return self.positive_above
        return POSITIVE_ABOVE if self.max_false_discovery is None else None

    @property
    def has_targets(self) -> bool:
        return self.target_sensitivity is not None or self.max_false_discovery is not None

    def negative_rule(self) -> str:
        names = [n for n, v in (("negative-below", self.low),
                                ("target-sensitivity", self.target_sensitivity)) if v is not None]
        return "+".join(names)

    def positive_rule(self) -> str:
        names = [n for n, v in (("positive-above", self.high),
                                ("max-false-discovery", self.max_false_discovery))
                 if v is not None]
        return "+".join(names)

    def describe(self) -> str:
        parts = []
        if self.low is not None:
            parts.append(f"negative below {self.low:g}")
        if self.target_sensitivity is not None:
            parts.append(f"negatives within a target batch sensitivity of "
                         f"{self.target_sensitivity:g}")
        if self.high is not None:
            parts.append(f"positive above {self.high:g}")
        if self.max_false_discovery is not None:
            parts.append(f"positives within a false discovery rate of "
                         f"{self.max_false_discovery:g}")
        return "; ".join(parts)

    def to_dict(self) -> dict:
        return {"negative_below": self.low, "positive_above": self.high,
                "target_sensitivity": self.target_sensitivity,
                "max_false_discovery": self.max_false_discovery}


def target_negatives(p: np.ndarray, eligible: np.ndarray, target_sensitivity: float,
                     expected_positives: float) -> np.ndarray:
    """Mask of the largest set of lowest-p eligible specimens whose summed p stays within
    (1 - target_sensitivity) x ``expected_positives`` (Mueller et al. 2004: posterior expected
    false omissions). Ties are broken by specimen order."""
    idx = np.flatnonzero(eligible)
    order = idx[np.argsort(p[idx], kind="stable")]
    allowance = (1.0 - target_sensitivity) * expected_positives
    k = int(np.searchsorted(np.cumsum(p[order]), allowance * (1 + 1e-12), side="right"))
    out = np.zeros(len(p), dtype=bool)
    out[order[:k]] = True
    return out


def target_positives(p: np.ndarray, eligible: np.ndarray, max_false_discovery: float) -> np.ndarray:
    """Mask of the largest set of highest-p eligible specimens whose expected false positives,
    the sum of (1 - p), stay within ``max_false_discovery`` times their number (posterior expected
    FDR; Newton et al. 2004). The running mean of (1 - p) over the sorted specimens never falls, so
    the feasible sets are the prefixes up to the last feasible one."""
    idx = np.flatnonzero(eligible)
    order = idx[np.argsort(-p[idx], kind="stable")]
    excess = np.cumsum((1.0 - p[order]) - max_false_discovery)
    ok = np.flatnonzero(excess <= 1e-12 * np.arange(1, len(order) + 1))
    k = int(ok[-1]) + 1 if len(ok) else 0
    out = np.zeros(len(p), dtype=bool)
    out[order[:k]] = True
    return out


@dataclass(frozen=True)
class Decision:
    """Per-specimen call codes (0 negative, 1 inconclusive, 2 positive, 3 untested) and the rule
    that made each call (``rules``, the ``call_rule`` column)."""

    codes: np.ndarray
    rules: np.ndarray

    def calls(self) -> np.ndarray:
        return np.asarray(CALLS, dtype=object)[self.codes]

    def counts(self) -> dict:
        c = np.bincount(self.codes, minlength=len(CALLS))
        return {name: int(c[j]) for j, name in enumerate(CALLS)}


def decide(probability, rule: DecisionRule, tested=None) -> Decision:
    """Calls for every specimen under ``rule``; ``tested`` (bool per specimen, default all) marks
    specimens with at least one read pool."""
    p = np.asarray(probability, dtype=float)
    n = len(p)
    tested = np.ones(n, dtype=bool) if tested is None else np.asarray(tested, dtype=bool)
    neg = tested.copy()
    pos = tested.copy()
    if rule.low is not None:
        neg &= p < rule.low
    if rule.target_sensitivity is not None:
        neg &= target_negatives(p, tested, rule.target_sensitivity, float(p.sum()))
    if rule.high is not None:
        pos &= p > rule.high
    if rule.max_false_discovery is not None:
        pos &= target_positives(p, tested, rule.max_false_discovery)
    both = neg & pos  # only with targets on a tiny batch: neither call holds
    neg &= ~both
    pos &= ~both
    codes = np.full(n, INCONCLUSIVE, dtype=np.int8)
    codes[neg] = NEGATIVE
    codes[pos] = POSITIVE
    codes[~tested] = UNTESTED
    names = np.array([rule.negative_rule(), f"{rule.negative_rule()}/{rule.positive_rule()}",
                      rule.positive_rule(), "no-readout"], dtype=object)
    return Decision(codes, names[codes])


# ---- joint distributions of the batch's counts
@njit(cache=True)
def poisson_binomial(p, tol=1e-18):
    """Distribution of a sum of independent Bernoulli(p_i): returns (dist, offset), tails below
    ``tol`` trimmed as they form (the cost follows the support, not the number of terms)."""
    n = len(p)
    buf = np.zeros(n + 2)
    buf[0] = 1.0
    lo, hi = 0, 0  # support [lo, hi] inside buf (indices are counts)
    for i in range(n):
        q = p[i]
        if q <= 0.0:
            continue
        buf[hi + 1] = 0.0
        for j in range(hi + 1, lo, -1):
            buf[j] = buf[j] * (1.0 - q) + buf[j - 1] * q
        buf[lo] = buf[lo] * (1.0 - q)
        hi += 1
        while lo < hi and buf[lo] < tol:
            lo += 1
        while hi > lo and buf[hi] < tol:
            hi -= 1
    out = buf[lo:hi + 1].copy()
    return out / out.sum(), lo


def _trim2d(arr: np.ndarray, off: tuple, tol: float):
    keep = arr > tol * arr.max()
    rows = np.flatnonzero(keep.any(axis=1))
    cols = np.flatnonzero(keep.any(axis=0))
    return (arr[rows[0]:rows[-1] + 1, cols[0]:cols[-1] + 1],
            (off[0] + int(rows[0]), off[1] + int(cols[0])))


def convolve2d(parts, tol: float = 1e-15):
    """Distribution of the sum of independent 2-D counts, each (array, (row offset, col offset)):
    a balanced tree of convolutions (scipy picks direct or FFT by size), negative round-off clipped,
    tails below ``tol`` of the peak trimmed."""
    from scipy.signal import convolve
    items = [_trim2d(np.asarray(a, dtype=float), o, tol) for a, o in parts if np.size(a)]
    if not items:
        return np.ones((1, 1)), (0, 0)
    while len(items) > 1:
        nxt = []
        for j in range(0, len(items) - 1, 2):
            (a1, o1), (a2, o2) = items[j], items[j + 1]
            c = np.clip(convolve(a1, a2), 0.0, None)
            c /= c.sum()
            nxt.append(_trim2d(c, (o1[0] + o2[0], o1[1] + o2[1]), tol))
        if len(items) % 2:
            nxt.append(items[-1])
        items = nxt
    return items[0]


def _quantiles(values: np.ndarray, weights: np.ndarray, level: float = LEVEL):
    order = np.argsort(values, kind="stable")
    v, cdf = values[order], np.cumsum(weights[order])
    cdf /= cdf[-1]
    a = (1 - level) / 2
    lo = v[min(int(np.searchsorted(cdf, a - 1e-12)), len(v) - 1)]
    hi = v[min(int(np.searchsorted(cdf, 1 - a - 1e-12)), len(v) - 1)]
    return float(lo), float(hi)


@dataclass(frozen=True)
class BatchExpectation:
    """What the batch can expect of its calls, with 95% intervals from the joint posterior.

    ``missed`` (a 2-D array over (positives among negative calls, positives among the other
    specimens), offsets ``offset``) and ``confirmed`` (positives among positive calls, from
    ``b_offset``) are the joint distributions; ``basis`` says how they were obtained and
    ``approximate`` whether any part of them is an approximation.
    """

    missed: np.ndarray
    offset: tuple
    confirmed: np.ndarray
    b_offset: int
    n_negative: int
    n_positive: int
    mean_missed: float
    mean_false_positives: float
    basis: str
    approximate: bool
    level: float = LEVEL

    def _grid(self):
        a = np.arange(self.missed.shape[0])[:, None] + self.offset[0]
        r = np.arange(self.missed.shape[1])[None, :] + self.offset[1]
        total = a + r
        sens = np.where(total > 0, 1.0 - a / np.maximum(total, 1), 1.0)
        return a, sens

    def summary(self) -> dict:
        """The ``"batch"`` entry of ``--json``: mean, low, high of each quantity."""
        a_grid, sens = self._grid()
        w = self.missed
        a_marg = w.sum(axis=1)
        a_vals = np.arange(len(a_marg), dtype=float) + self.offset[0]
        b_vals = np.arange(len(self.confirmed), dtype=float) + self.b_offset
        fp_vals = self.n_positive - b_vals
        fdr_vals = fp_vals / self.n_positive if self.n_positive else np.zeros_like(fp_vals)

        def entry(mean, values, weights):
            lo, hi = _quantiles(np.asarray(values, dtype=float).ravel(),
                                np.asarray(weights, dtype=float).ravel(), self.level)
            return {"mean": float(mean), "low": lo, "high": hi}

        fdr_mean = self.mean_false_positives / self.n_positive if self.n_positive else 0.0
        return {
            "expected_missed": entry(self.mean_missed, a_vals, a_marg),
            "expected_false_positives": entry(self.mean_false_positives, fp_vals, self.confirmed),
            "expected_sensitivity": entry(float((sens * w).sum()), sens, w),
            "expected_false_discovery_rate": entry(fdr_mean, fdr_vals, self.confirmed),
            "negative_calls": self.n_negative, "positive_calls": self.n_positive,
            "level": self.level, "basis": self.basis, "approximate": self.approximate,
        }


def batch_expectation(run, assay, posterior, codes=None, *, lik=None, comps=None) -> BatchExpectation:
    """The joint distribution of the calls' errors for ``posterior`` (see the module docstring).

    ``codes`` are the call codes (default: the posterior's own); ``lik`` = (lik_ptr, loglik) and
    ``comps`` (the run's components) are reused when the caller has them.
    """
    from .decoders.exact import EXACT_LIMIT
    from .decoders.graph import components
    codes = np.asarray(posterior.call_codes() if codes is None else codes, dtype=np.int8)
    p = np.asarray(posterior.probability, dtype=float)
    n = len(p)
    neg, pos = codes == NEGATIVE, codes == POSITIVE
    method = np.asarray(posterior.sample_method, dtype=object)
    comps = components(run) if comps is None else comps
    sizes = comps.sizes
    label = comps.sample_label
    comp_method = np.full(comps.n_components, "", dtype=object)
    comp_method[label] = method
    exact = np.flatnonzero((comp_method == "exact") & (sizes > 1) & (sizes <= EXACT_LIMIT))
    draws = posterior.draws
    sampled = np.zeros(n, dtype=bool)
    if draws is not None and draws.ndim == 2 and draws.shape[1] == n and len(draws):
        sampled = (method == "gibbs")
    in_exact = np.zeros(n, dtype=bool)
    if len(exact):
        in_exact[np.concatenate([comps.samples_of(int(c)) for c in exact])] = True
    alone = sizes[label] == 1
    independent = ~in_exact & ~sampled
    approx = independent & ~alone
    parts2d, parts_b = [], []
    basis = []
    if len(exact):
        lik_ptr, loglik = run.log_likelihood(assay) if lik is None else lik
        na = np.bincount(label[neg], minlength=comps.n_components)[exact]
        nb = np.bincount(label[pos], minlength=comps.n_components)[exact]
        nr = sizes[exact] - na
        out_ptr = np.zeros(len(exact) + 1, dtype=np.int64)
        np.cumsum((na + 1) * (nr + 1), out=out_ptr[1:])
        b_ptr = np.zeros(len(exact) + 1, dtype=np.int64)
        np.cumsum(nb + 1, out=b_ptr[1:])
        out2d, out_b = np.zeros(int(out_ptr[-1])), np.zeros(int(b_ptr[-1]))
        prior = np.asarray(run.prior, dtype=float)
        from .decoders.exact_counts import component_counts
        component_counts(exact, comps.sample_ptr, comps.samples, comps.pool_ptr, comps.pools,
                          run.sample_ptr, run.sample_pools, lik_ptr, loglik, np.log(prior),
                          np.log1p(-prior), codes, out_ptr, out2d, b_ptr, out_b)
        for j in range(len(exact)):
            block = out2d[out_ptr[j]:out_ptr[j + 1]].reshape(na[j] + 1, nr[j] + 1)
            parts2d.append((block, (0, 0)))
            parts_b.append(out_b[b_ptr[j]:b_ptr[j + 1]])
        basis.append(f"exact enumeration of {len(exact)} linked group(s), convolved")
    if sampled.any():
        x = np.asarray(draws, dtype=np.int64)
        a = x[:, neg & sampled].sum(axis=1)
        r = x[:, ~neg & sampled].sum(axis=1)
        b = x[:, pos & sampled].sum(axis=1)
        hist = np.zeros((a.max() - a.min() + 1, r.max() - r.min() + 1))
        np.add.at(hist, (a - a.min(), r - r.min()), 1.0)
        parts2d.append((hist / len(x), (int(a.min()), int(r.min()))))
        hb = np.bincount(b - b.min()).astype(float)
        parts_b.append(np.concatenate([np.zeros(int(b.min())), hb / len(x)]))
        basis.append(f"{len(x)} joint draws of the Gibbs sampler for {int(sampled.sum())} "
                     "specimen(s) (Monte Carlo)")
    if independent.any():
        da, oa = poisson_binomial(p[independent & neg])
        dr, orr = poisson_binomial(p[independent & ~neg])
        db, ob = poisson_binomial(p[independent & pos])
        parts2d.append((np.outer(da, dr), (oa, orr)))
        parts_b.append(np.concatenate([np.zeros(ob), db]))
        if approx.any():
            basis.append(f"marginals of {int(approx.sum())} specimen(s) in linked groups decoded "
                         f"by {'/'.join(sorted(set(method[approx])))} taken as independent "
                         "(approximate)")
        if (independent & alone).any():
            basis.append(f"{int((independent & alone).sum())} specimen(s) alone in their group "
                         "(exact)")
    from .decoders.counts import convolve_counts
    dist2d, off = convolve2d(parts2d)
    dist_b, b_off = convolve_counts(parts_b)
    return BatchExpectation(dist2d, off, dist_b, int(b_off), int(neg.sum()), int(pos.sum()),
                            float(p[neg].sum()), float((1.0 - p[pos]).sum()),
                            "; ".join(basis), bool(approx.any() or sampled.any()))


def batch_warnings(summary: dict, rule: DecisionRule) -> list[str]:
    """A warning when the calls' expected batch sensitivity is below 0.9, naming the fix."""
    sens = summary["expected_sensitivity"]["mean"]
    if sens >= SENSITIVITY_WARNING:
        return []
    if rule.target_sensitivity is None:
        fix = "give --target-sensitivity (e.g. 0.95) or lower --negative-below"
    else:
        fix = "lower --negative-below or raise --target-sensitivity"
    return [f"WARNING: the negative calls are expected to miss "
            f"{summary['expected_missed']['mean']:.1f} positive specimen(s): an expected batch "
            f"sensitivity of {sens:.3f}, below {SENSITIVITY_WARNING}; {fix}"]
