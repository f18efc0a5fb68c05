"""Posterior objects from the sampler: ``--method gibbs`` and the fallback for other decoders.

``decode_gibbs`` samples every specimen of the run jointly and returns a :class:`Posterior` with
Monte Carlo errors, the number-of-positives distribution, ambiguity groups and kept draws.
``sample_components`` samples only the given connected components, and ``fallback`` wraps it for a
decoder (``auto``) that hands over the parts it could not settle; the caller combines the result.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...defaults import NEGATIVE_BELOW, POSITIVE_ABOVE
from ...errors import InputError
from ...validation import check_count
from ..posterior import Posterior
from .joint import ambiguity_groups, count_summary
from .sampler import CHAINS, GibbsResult, GibbsSampler

OPTIONS = ("chains", "warmup", "min_sweeps", "max_sweeps", "rhat_target", "ess_target",
           "prevalence_prior", "max_draws", "memory_budget", "progress", "moves")


def option_name(name: str) -> str:
    """How errors name a sampler option: as an entry of ``decode``'s ``gibbs_options``."""
    return f'gibbs_options["{name}"]'


def check_options(options: dict | None) -> dict:
    """Validated sampler options (names as in :meth:`GibbsSampler.sample`)."""
    options = dict(options or {})
    unknown = sorted(set(options) - set(OPTIONS))
    if unknown:
        raise InputError(f"unknown Gibbs option(s) {', '.join(unknown)} in gibbs_options "
                         f"(choose from {', '.join(OPTIONS)})", parameters=("gibbs_options",))
    for name, least in (("chains", 1), ("warmup", 0), ("min_sweeps", 8), ("max_sweeps", 8)):
        if options.get(name) is not None:
            options[name] = check_count(options[name], option_name(name), least)
    if options.get("prevalence_prior") is not None:
        from .prevalence import parse_beta_prior
        options["prevalence_prior"] = parse_beta_prior(options["prevalence_prior"],
                                                       option_name("prevalence_prior"))
    return {k: v for k, v in options.items() if v is not None}


def run_sampler(run, lik_ptr, loglik, specimens=None, seed=None, negative_below=0.01,
                positive_above=0.99, options=None, start=None) -> GibbsResult:
    """Sample ``specimens`` (all by default) with the given options; see :class:`GibbsSampler`
    (``start``: probabilities to draw the first chain's start from)."""
    opts = check_options(options)
    sampler = GibbsSampler(run, lik_ptr, loglik, specimens, chains=opts.pop("chains", CHAINS),
                           moves=opts.pop("moves", None),
                           prevalence_prior=opts.pop("prevalence_prior", None))
    return sampler.sample(seed=seed, negative_below=negative_below, positive_above=positive_above,
                          start=start, **opts)


def summary_of(result: GibbsResult, run, negative_below, positive_above) -> dict:
    """The sampler's part of a Posterior's diagnostics (and so of ``--json``)."""
    groups = ambiguity_groups(run, _full(result, run), result.draws, result.specimens,
                              negative_below, positive_above)
    out = {"converged": result.converged, "gibbs": dict(result.diagnostics),
           "ambiguity_groups": groups,
           "positives_posterior": count_summary(result.count_distribution)}
    if result.prevalence is not None:
        out["prevalence_posterior"] = result.prevalence
    return out


def _full(result: GibbsResult, run) -> np.ndarray:
    p = np.array(run.prior, dtype=float)
    p[result.specimens] = result.probability
    return p


def decode_gibbs(run, lik_ptr, loglik, negative_below, positive_above, seed=None,
                 options=None, columns=None) -> Posterior:
    """Every specimen of ``run`` by the Gibbs sampler, as a :class:`Posterior`."""
    result = run_sampler(run, lik_ptr, loglik, None, seed, negative_below, positive_above,
                         options)
    diagnostics = summary_of(result, run, negative_below, positive_above)
    warnings = list(run.notes)
    if not result.converged:
        warnings.append("Gibbs sampler " + result.reason + "; probabilities carry a larger Monte "
                        "Carlo error than usual (see the mcse column)")
    cols = dict(columns or {})
    cols["rhat"] = result.rhat
    cols["ess"] = result.ess
    prior = run.prior
    if result.prevalence is not None:  # the shared prevalence's prior mean replaces the priors
        a, b = result.prevalence["prior"]
        prior = np.full(run.n_samples, a / (a + b))
    return Posterior(run.sample_ids, result.probability, prior, "gibbs",
                     np.full(run.n_samples, "gibbs", dtype=object), negative_below,
                     positive_above, mcse=result.mcse, count_distribution=result.count_distribution,
                     draws=result.draws, diagnostics=diagnostics, columns=cols, warnings=warnings)


def sample_components(run, lik_ptr, loglik, comps, selected, seed=None, negative_below=0.01,
                      positive_above=0.99, options=None, start=None) -> GibbsResult:
    """Sample only the specimens of components ``selected`` (fallback hook for ``auto``).

    The caller keeps its own probabilities elsewhere and takes ``result.probability`` for
    ``result.specimens``, ``result.mcse`` and ``result.count_distribution`` (over those specimens,
    to convolve with the other parts' distributions).
    """
    selected = np.asarray(selected, dtype=np.int64)
    if len(selected) == 0:
        raise ValueError("no component to sample")
    specimens = np.concatenate([comps.samples_of(int(c)) for c in selected])
    opts = dict(options or {})
    if opts.get("prevalence_prior") is not None:
        raise InputError("an unknown prevalence links every specimen; use method gibbs",
                         parameters=("method",))
    return run_sampler(run, lik_ptr, loglik, specimens, seed, negative_below, positive_above,
                       opts, start)


@dataclass
class Fallback:
    """The sampler's answer for components another decoder handed over (see :func:`fallback`)."""

    specimens: np.ndarray
    probability: np.ndarray
    mcse: np.ndarray
    rhat: np.ndarray
    ess: np.ndarray
    count_distribution: np.ndarray
    note: str
    diagnostics: dict


def fallback(run, lik_ptr, loglik, comps, selected, why: str, seed=None,
             negative_below=NEGATIVE_BELOW, positive_above=POSITIVE_ABOVE,
             options=None, start=None) -> Fallback:
    """Decode components ``selected`` by the sampler because ``why`` (e.g. "BP did not converge").

    The hook for ``auto``: the caller writes ``probability`` (and ``mcse``) into its arrays at
    ``specimens``, convolves ``count_distribution`` with its other parts, and shows ``note``.
    """
    result = sample_components(run, lik_ptr, loglik, comps, selected, seed, negative_below,
                               positive_above, options, start)
    full = summary_of(result, run, negative_below, positive_above)
    full.pop("positives_posterior")  # covers the sampled part only; the caller convolves
    note = (f"{why}: {len(result.specimens)} sample(s) in {len(selected)} group(s) decoded by the "
            f"Gibbs sampler ({result.reason})")
    return Fallback(result.specimens, result.probability, result.mcse, result.rhat, result.ess,
                    result.count_distribution, note, full)
