"""Decoders: posterior probability of every specimen given pooled readouts.

``decode(run, assay, method)`` splits the sample-pool graph into connected components and decodes
each: ``exact`` enumerates a component's states; ``auto`` picks per component.
"""
from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..run import Run
from .counts import count_distribution
from .exact import EXACT_LIMIT, decode_exact, impossible
from .graph import Components, components
from .posterior import (DEFAULT_NEGATIVE_BELOW, DEFAULT_POSITIVE_ABOVE, Posterior,
                        check_thresholds)

from ..defaults import METHODS

__all__ = ["decode", "Posterior", "METHODS", "EXACT_LIMIT", "components", "Components"]


def _check_pools_possible(run: Run, lik_ptr, loglik):
    """A pool whose every count d has likelihood zero cannot be explained by anything."""
    tested = np.flatnonzero((run.n_positive + run.n_negative) > 0)
    finite = np.isfinite(loglik)
    any_ok = np.add.reduceat(finite, lik_ptr[:-1]) > 0 if len(loglik) else np.zeros(0, bool)
    dead = tested[~any_ok[tested]]
    if len(dead):
        raise impossible(run, dead)


def sample_columns(run: Run) -> dict:
    """Per-specimen counts of read pools and of pools with a positive readout."""
    owner_pos = np.repeat((run.n_positive > 0), run.pool_size)
    owner_read = np.repeat((run.n_positive + run.n_negative) > 0, run.pool_size)
    n = run.n_samples
    return {"pools": np.bincount(run.pool_members[owner_read], minlength=n),
            "positive_pools": np.bincount(run.pool_members[owner_pos], minlength=n)}


def decode(run: Run, assay, method: str = "auto",
           negative_below: float = DEFAULT_NEGATIVE_BELOW,
           positive_above: float = DEFAULT_POSITIVE_ABOVE,
           seed=None, exact_limit: int = EXACT_LIMIT) -> Posterior:
    """Posterior P(x_i = 1 | readouts) for every specimen of ``run`` under ``assay``."""
    if method not in METHODS:
        raise InputError(f"unknown method {method!r} (choose one of {', '.join(METHODS)})")
    lo, hi = check_thresholds(negative_below, positive_above)
    if run.n_samples == 0:
        raise InputError("there are no samples to decode: the layout is empty and no samples file "
                         "lists any", run.sources.get("layout"))
    lik_ptr, loglik = run.log_likelihood(assay)
    _check_pools_possible(run, lik_ptr, loglik)
    comps = components(run)
    sizes = comps.sizes
    if method in ("auto", "exact") and len(sizes) and sizes.max() > exact_limit:
        big = int(sizes.max())
        hint = ("use --method bp or gibbs" if method == "exact"
                else "no approximate decoder is available yet for such groups")
        raise InputError(f"a connected group of {big} samples linked through shared pools is above "
                         f"the exact decoder's limit of {exact_limit} samples; {hint}")
    prob, log_z, count_ptr, counts = decode_exact(run, lik_ptr, loglik, comps, limit=exact_limit)
    parts = [counts[count_ptr[c]:count_ptr[c + 1]] for c in range(comps.n_components)]
    dist = count_distribution(parts, run.n_samples)
    diagnostics = {"components": int(comps.n_components),
                   "largest_component": int(sizes.max()) if len(sizes) else 0}
    return Posterior(run.sample_ids, prob, run.prior, "exact",
                     np.full(run.n_samples, "exact", dtype=object), lo, hi,
                     log_evidence=float(log_z.sum()), count_distribution=dist,
                     diagnostics=diagnostics, columns=sample_columns(run),
                     warnings=list(run.notes))
