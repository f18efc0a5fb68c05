"""Joint posterior draws of the statuses, the planner's picture of what it does not know yet.

Information gain is estimated over draws x ~ P(x | readouts). ``posterior_draws`` takes the
decoder's own draws when it kept them (``Posterior.draws``, e.g. from a Gibbs sampler) and otherwise
makes them: exact joint draws for every connected component small enough to enumerate (the posterior
factorises over components, so they are drawn independently), and independent draws from the
marginals for specimens alone in their component and for components too large to enumerate (an
approximation, reported in the notes). Components without an undecided specimen are drawn from their
marginals too: no candidate test touches them jointly.
"""
from __future__ import annotations

import numpy as np

from ..decoders.exact import EXACT_LIMIT
from ..decoders.exact_sample import sample_exact
from ..decoders.graph import components
from . import DEFAULT_DRAWS

SAMPLE_LIMIT = EXACT_LIMIT  # largest component drawn exactly


def posterior_draws(run, assay, posterior, n_draws: int = DEFAULT_DRAWS, rng=None,
                    notes: list | None = None) -> np.ndarray:
    """Joint posterior draws, an array (n_draws, n_samples) of uint8 (1 = positive).

    ``rng`` is a ``numpy.random.Generator`` (or a seed). ``notes`` (a list), when given, receives a
    line about any approximation made.
    """
    rng = np.random.default_rng(rng)
    n = run.n_samples
    if posterior.draws is not None and posterior.draws.ndim == 2 and posterior.draws.shape[1] == n:
        kept = posterior.draws
        if len(kept) > n_draws:
            kept = kept[np.sort(rng.choice(len(kept), n_draws, replace=False))]
        return np.ascontiguousarray(kept, dtype=np.uint8)
    prob = np.asarray(posterior.probability, dtype=float)
    comps = components(run)
    sizes = comps.sizes
    undecided = np.zeros(n, dtype=bool)
    undecided[posterior.undecided()] = True
    has_undecided = np.bincount(comps.sample_label, weights=undecided,
                                minlength=comps.n_components) > 0
    joint = np.flatnonzero(has_undecided & (sizes > 1) & (sizes <= SAMPLE_LIMIT))
    too_big = np.flatnonzero(has_undecided & (sizes > SAMPLE_LIMIT))
    if len(too_big) and notes is not None:
        notes.append(f"{len(too_big)} linked group(s) above {SAMPLE_LIMIT} specimens drawn from "
                     "their marginals (joint structure ignored there)")
    out = (rng.random((n, n_draws), dtype=np.float32) < prob[:, None]).astype(np.uint8)
    if len(joint):
        lik_ptr, loglik = run.log_likelihood(assay)
        exact = sample_exact(run, lik_ptr, loglik, comps, joint, n_draws, rng)
        rows = np.concatenate([comps.samples_of(int(c)) for c in joint])
        out[rows] = exact[rows]
    return out.T  # draws x specimens, a view of the specimen-major array the planner reads
