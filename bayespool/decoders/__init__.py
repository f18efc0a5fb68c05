"""Decoders: posterior probability of every specimen given pooled readouts.

``decode(run, assay, method)`` splits the sample-pool graph into connected components and decodes
each with one decoder: ``exact`` enumerates a component's states, ``bp`` runs loopy belief
propagation, ``auto`` chooses per component by cost (:func:`choose_decoders`). Every part decoder
takes one :class:`DecodeProblem` (run, likelihoods, components), the selected components and typed
:class:`DecodeOptions`, and returns a :class:`DecodedPart`; :data:`PART_DECODERS` is the fixed,
read-only table of them. A component on which BP did not converge is handed to the decoder
:func:`fallback_decoder` names.
``gibbs`` samples the whole run jointly (bayespool.decoders.gibbs), as does any method given an
unknown prevalence (which links every sample).
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from types import MappingProxyType
from typing import Callable

import numpy as np

from ..decisions import DecisionRule
from ..defaults import METHODS
from ..errors import InputError
from ..run import Run
from .bp import (DAMPING, MAX_SWEEPS, TOLERANCE, BPResult, check_bp_options, decode_bp,
                 finite_or_none)
from .counts import count_distribution
from .exact import EXACT_LIMIT, check_component_sizes, decode_exact, impossible
from .graph import Components, components
from .loopy import SAMPLER_LIMIT, check_text, loopy_check, loopy_for_sampler
from ..validation import check_choice, check_count, check_seed, check_thresholds
from .posterior import DEFAULT_NEGATIVE_BELOW, DEFAULT_POSITIVE_ABOVE, Posterior

__all__ = ["decode", "Posterior", "METHODS", "EXACT_LIMIT", "EXACT_BUDGET", "components",
           "Components", "choose_decoders", "fallback_decoder", "PART_DECODERS", "DecodedPart",
           "DecodeProblem", "DecodeOptions"]

# auto: total work allowed for exact enumeration, in state updates (2^m * (m + 1) per component of
# m samples); about a second or two on one core. Tree-shaped components past it go to BP (exact on
# trees). Loopy components of at most EXACT_LIMIT samples have their own, larger budget: each is
# enumerated whatever the rest of the run holds, up to LOOPY_BUDGET in all (2^36 state updates,
# about a minute or two on one core; a run of 60 groups of 20 needs 1.3e9, a second or two).
EXACT_BUDGET = 2.0 ** 30
LOOPY_BUDGET = 2.0 ** 36


def _check_pools_possible(run: Run, lik_ptr, loglik):
    """A pool whose every count d has likelihood zero cannot be explained by anything."""
    tested = np.flatnonzero(run.pool_read)
    finite = np.isfinite(loglik)
    any_ok = np.add.reduceat(finite, lik_ptr[:-1]) > 0 if len(loglik) else np.zeros(0, bool)
    dead = tested[~any_ok[tested]]
    if len(dead):
        raise impossible(run, dead)


def sample_columns(run: Run) -> dict:
    """Per-specimen counts of read pools and of pools with a positive readout, and the plate and
    well of the samples file when it gives them (so the posterior can be found on the bench)."""
    owner_pos = np.repeat((run.n_positive > 0), run.pool_size)
    owner_read = np.repeat(run.pool_read, run.pool_size)
    n = run.n_samples
    out = {"pools": np.bincount(run.pool_members[owner_read], minlength=n),
           "positive_pools": np.bincount(run.pool_members[owner_pos], minlength=n)}
    for name in ("plate", "well"):
        values = run.sample_column(name)
        if values is not None:
            out[name] = values
    return out


# ---- decoders of a set of components, all with one signature
@dataclass(frozen=True, eq=False)
class DecodeProblem:
    """What every part decoder reads: the run, its per-pool log-likelihoods ``log L_t[d]`` (flat,
    ``lik_ptr``/``loglik``, see :meth:`bayespool.run.Run.log_likelihood`) and its components."""

    run: Run
    lik_ptr: np.ndarray
    loglik: np.ndarray
    comps: Components


@dataclass(frozen=True)
class DecodeOptions:
    """The checked options of one decode, as the part decoders read them.

    ``ct`` holds what the Ct part decoders share (:class:`bayespool.decoders.ct_decode.CtShared`)
    under a ``[ct]`` assay, else None.
    """

    negative_below: float
    positive_above: float
    exact_limit: int = EXACT_LIMIT
    damping: float = DAMPING
    tolerance: float = TOLERANCE
    max_sweeps: int = MAX_SWEEPS
    progress: bool | None = None
    seed: object = None
    gibbs_options: dict | None = None
    exact_memo: object = None
    ct: object = None


@dataclass(eq=False)
class DecodedPart:
    """What one decoder returns for the components it was given.

    ``probability`` is indexed by specimen (only ``samples`` are meaningful). ``log_z`` (per
    component) and ``count_parts`` (distributions of the number of positives of independent parts,
    to be convolved) are None when the decoder does not know them. ``unconverged`` lists components whose result is not trustworthy (a fallback may redo them).
    """

    method: str
    components: np.ndarray
    samples: np.ndarray
    probability: np.ndarray
    log_z: np.ndarray | None = None
    count_parts: list | None = None
    mcse: np.ndarray | None = None
    draws: np.ndarray | None = None
    unconverged: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    converged: bool | None = None  # None: the notion does not apply (exact enumeration)
    diagnostics: dict = field(default_factory=dict)  # for the posterior's diagnostics (JSON)
    warnings: list = field(default_factory=list)
    bp: BPResult | None = None  # belief propagation's own result (sweeps, residual, tolerance)


def _samples_of(comps: Components, selected: np.ndarray) -> np.ndarray:
    if len(selected) == comps.n_components:
        return comps.samples
    if not len(selected):
        return np.zeros(0, dtype=np.int32)
    return np.concatenate([comps.samples_of(int(c)) for c in selected])


def _exact_part(problem: DecodeProblem, selected, options: DecodeOptions) -> DecodedPart:
    comps = problem.comps
    prob, log_z, count_ptr, counts = decode_exact(problem.run, problem.lik_ptr, problem.loglik,
                                                  comps, selected, limit=options.exact_limit,
                                                  memo=options.exact_memo)
    parts = [counts[count_ptr[c]:count_ptr[c + 1]] for c in selected]
    return DecodedPart("exact", selected, _samples_of(comps, selected), prob, log_z[selected],
                       parts)


def _bp_part(problem: DecodeProblem, selected, options: DecodeOptions) -> DecodedPart:
    res = decode_bp(problem.run, problem.lik_ptr, problem.loglik, problem.comps, selected,
                    damping=options.damping, tolerance=options.tolerance,
                    max_sweeps=options.max_sweeps, progress=options.progress)
    return DecodedPart("bp", selected, _samples_of(problem.comps, selected), res.probability,
                       unconverged=res.unconverged, converged=bool(res.converged),
                       diagnostics=res.diagnostics(), bp=res)


# the built-in part decoders (problem, selected component ids, options) -> DecodedPart, by the
# method names ``choose_decoders`` gives components; read-only: a new decoder is added here and
# in defaults.METHODS together
PART_DECODERS: MappingProxyType = MappingProxyType({"exact": _exact_part, "bp": _bp_part})


def fallback_decoder(method: str, part: DecodedPart) -> Callable | None:
    """The part decoder that re-decodes the components on which ``part`` did not converge, or None.

    Only ``auto`` falls back (an explicit ``--method bp`` keeps BP's answer, with a warning). BP's
    fallback is the Gibbs sampler, through ``bayespool.decoders.gibbs.fallback``.
    """
    if method != "auto" or part.method != "bp" or not len(part.unconverged):
        return None
    return _gibbs_part


def _gibbs_part(problem: DecodeProblem, selected, options: DecodeOptions,
                why: str = "belief propagation did not converge", start=None) -> DecodedPart:
    """The Gibbs sampler on the given components, via :func:`bayespool.decoders.gibbs.fallback`;
    ``why`` goes into its note, ``start`` (probabilities, e.g. BP's) draws one chain's start."""
    from .gibbs import fallback
    run = problem.run
    fb = fallback(run, problem.lik_ptr, problem.loglik, problem.comps, selected, why,
                  options.seed, options.negative_below, options.positive_above,
                  options.gibbs_options, start)
    prob = np.array(run.prior, dtype=float)
    prob[fb.specimens] = fb.probability
    mcse = np.zeros(run.n_samples)
    mcse[fb.specimens] = fb.mcse
    diag = dict(fb.diagnostics)
    verdict = diag.get("gibbs", {}).get("converged")
    return DecodedPart("gibbs", np.asarray(selected, dtype=np.int64), np.asarray(fb.specimens),
                       prob, count_parts=[fb.count_distribution], mcse=mcse,
                       converged=None if verdict is None else bool(verdict),
                       diagnostics={**diag["gibbs"],
                                    "ambiguity_groups": diag.get("ambiguity_groups", [])},
                       warnings=[fb.note])


# ---- which decoder for which component
@dataclass(frozen=True)
class DecoderChoice:
    """Per-component decoder names and a sentence saying what was chosen and why."""

    method: np.ndarray  # object array (n_components,)
    text: str
    tree: np.ndarray | None = None  # auto: tree-shaped components (where BP is exact)

    def components(self, name: str) -> np.ndarray:
        return np.flatnonzero(self.method == name).astype(np.int64)

    def names(self) -> list[str]:
        return [m for m in PART_DECODERS if (self.method == m).any()]


def component_shape(run: Run, comps: Components):
    """Per component: number of samples and whether it is a tree (where BP is exact)."""
    sizes = comps.sizes
    n_pools = np.diff(comps.pool_ptr)
    pool_label = np.repeat(np.arange(comps.n_components), n_pools)
    edges = np.bincount(pool_label, weights=run.pool_size[comps.pools],
                        minlength=comps.n_components)
    tree = sizes + n_pools - 1 == edges
    return sizes, tree


def exact_cost(sizes: np.ndarray) -> np.ndarray:
    """State updates of Gray-code enumeration: 2^m states, each touching about m + 1 counters."""
    return np.exp2(sizes.astype(float)) * (sizes + 1)


def choose_decoders(run: Run, comps: Components, method: str, exact_limit: int = EXACT_LIMIT,
                    budget: float = EXACT_BUDGET, loopy_budget: float = LOOPY_BUDGET
                    ) -> DecoderChoice:
    """Decoder per component.

    A named method decodes every component. ``auto`` enumerates exactly every loopy component of at
    most ``exact_limit`` samples, cheapest first, while their summed cost 2^m (m + 1) stays within
    ``loopy_budget`` (BP is only approximate there, and one group's size does not take another's
    turn); tree-shaped components are enumerated within ``budget`` and otherwise go to BP, which is
    exact on trees. Loopy components left to BP (above the limit, or past the loopy budget) are
    approximate: the posterior marks their specimens ``bp-loopy``.
    """
    n_comp = comps.n_components
    if method != "auto":
        if method == "exact":
            check_component_sizes(comps, np.arange(n_comp), exact_limit)
        return DecoderChoice(np.full(n_comp, method, dtype=object),
                             f"{method} for all {n_comp} group(s) of linked samples")
    sizes, tree = component_shape(run, comps)
    cost = exact_cost(sizes)
    choice = np.full(n_comp, "bp", dtype=object)
    for shape, allowed in ((~tree, loopy_budget), (tree, budget)):
        eligible = np.flatnonzero((sizes <= exact_limit) & shape)
        order = eligible[np.argsort(cost[eligible], kind="stable")]
        choice[order[np.cumsum(cost[order]) <= allowed]] = "exact"
    ex = choice == "exact"
    parts = []
    if ex.any():
        parts.append(f"exact for {int(ex.sum())} group(s) of up to {int(sizes[ex].max())} "
                     f"linked samples ({exact_cost(sizes[ex]).sum():.3g} state updates)")
    if (~ex).any():
        big, n_tree = sizes[~ex], int(tree[~ex].sum())
        why = []
        if (big > exact_limit).any():
            why.append(f"{int((big > exact_limit).sum())} above {exact_limit} samples")
        over = (~ex) & (sizes <= exact_limit)
        if over.any():
            why.append(f"{int((over & tree).sum())} tree-shaped past the enumeration budget of "
                       f"{budget:.3g} state updates, {int((over & ~tree).sum())} loopy past the "
                       f"loopy budget of {loopy_budget:.3g}")
        parts.append(f"bp for {int((~ex).sum())} group(s) of {int(big.sum())} samples (largest "
                     f"{int(big.max())}; {'; '.join(why)}; {n_tree} tree-shaped, where BP is "
                     f"exact, {int((~ex).sum()) - n_tree} loopy, where it is approximate: "
                     "method bp-loopy)")
    return DecoderChoice(choice, "auto: " + ", ".join(parts) if parts else "auto: nothing to do",
                         tree)


# ---- the entry point
def decode(run: Run, assay, *, method: str = "auto",
           negative_below: float | None = None,
           positive_above: float | None = None,
           seed=None, exact_limit: int = EXACT_LIMIT, damping: float = DAMPING,
           tolerance: float = TOLERANCE, max_sweeps: int = MAX_SWEEPS,
           progress: bool | None = None, gibbs_options: dict | None = None,
           target_sensitivity: float | None = None, max_false_discovery: float | None = None,
           expectations: bool = True, model_check: bool = True,
           exact_memo: dict | None = None,
           loopy_sampler_limit: int = SAMPLER_LIMIT) -> Posterior:
    """Posterior P(x_i = 1 | readouts) for every specimen of ``run`` under ``assay``.

    ``method`` is one of :data:`METHODS`. ``damping``, ``tolerance`` and ``max_sweeps`` steer belief
    propagation (see :mod:`bayespool.decoders.bp`); ``progress`` shows sweeps on stderr (default: when
    it is a terminal and the run is large). ``gibbs_options`` go to the Gibbs sampler (chains,
    max_sweeps, prevalence_prior, ...; see :meth:`bayespool.decoders.gibbs.GibbsSampler.sample`).
    ``loopy_sampler_limit``: with ``auto``, loopy groups too large to enumerate are re-decoded
    by the Gibbs sampler, smallest first, up to this many specimens (0: keep BP's answer, marked
    ``bp-loopy``; see :mod:`bayespool.decoders.loopy`).
    ``exact_memo``: an :class:`~bayespool.decoders.exact.ExactMemo` the caller keeps across
    decodes of a growing run (the closed loop); components whose enumeration would read exactly
    the same numbers are taken from it (bit-identical results).

    Calls: ``negative_below`` / ``positive_above`` (default 0.01 / 0.99 unless a target covers
    that side) and the batch targets ``target_sensitivity`` / ``max_false_discovery``
    (:mod:`bayespool.decisions`). ``expectations`` adds what the batch can expect of its calls
    (``Posterior.batch``), ``model_check`` the posterior predictive check of the readouts
    (``Posterior.model_check``, :mod:`bayespool.modelcheck`).

    Parameters
    ----------
    run : Run
        Layout, readouts and priors (:func:`bayespool.read_run`).
    assay : Assay
        Specificity and Se(k, d) (:func:`bayespool.read_assay`).
    method : {"auto", "exact", "bp", "gibbs"}
        ``auto``: exact enumeration of small groups of linked specimens (at most ``exact_limit``),
        belief propagation on large ones, the Gibbs sampler where propagation is loopy.
    negative_below, positive_above : float, optional
        Call thresholds on the probability.
    seed : int or numpy.random.Generator, optional
        Random seed of the sampler (reproducible results).
    damping, tolerance, max_sweeps : float, float, int
        Belief propagation: damping in [0, 1), convergence tolerance on message log-odds, sweep cap.
    gibbs_options : dict, optional
        Options of the Gibbs sampler (``chains``, ``max_sweeps``, ``prevalence_prior``, ...).
    target_sensitivity, max_false_discovery : float, optional
        Batch targets for the calls.

    Returns
    -------
    Posterior
        Probabilities and calls per specimen (``to_frame()`` indexed by sample), diagnostics.

    Raises
    ------
    InputError
        A bad option (naming the parameter) or a run the assay cannot decode.
    ImpossibleEvidenceError
        Readouts that have probability zero under the assay (e.g. a positive pool of specimens all
        ruled out by a perfectly sensitive test).

    References
    ----------
    Exact enumeration of the posterior of linked specimens; loopy belief propagation:
    Sejdinovic & Johnson (2010), Allerton; Gibbs sampling with latent statuses: Knill, Schliep &
    Torney (1996), J. Comput. Biol. 3(3); McMahan, Tebbs, Hanson & Bilder (2017), Biometrics
    73(4); batch expectations: Müller, Parmigiani, Robert & Rousseau (2004), JASA 99; model check:
    Gelman, Meng & Stern (1996), Statistica Sinica 6.

    Examples
    --------
    >>> import bayespool
    >>> run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
    ...                          "datasets/demo/samples.csv")
    >>> posterior = bayespool.decode(run, bayespool.read_assay("datasets/demo/assay.toml"))
    >>> posterior.counts()
    {'positive': 4, 'negative': 279, 'inconclusive': 5, 'untested': 0}
    >>> posterior.to_frame().loc["SW1-A1", "call"]
    'negative'
    """
    from ..ct_evidence import ct_notes
    rule = DecisionRule(negative_below, positive_above, target_sensitivity, max_false_discovery)
    post = _decode(run, assay, method, rule, seed, exact_limit, damping, tolerance, max_sweeps,
                   progress, gibbs_options, expectations, model_check, exact_memo,
                   loopy_sampler_limit)
    post.warnings.extend(ct_notes(run, assay))
    post.n_pools, post.n_readouts = run.n_pools, run.n_readouts
    return post


def _decode(run, assay, method, rule, seed, exact_limit, damping, tolerance, max_sweeps,
            progress, gibbs_options, expectations, model_check, exact_memo=None,
            loopy_sampler_limit=SAMPLER_LIMIT) -> Posterior:
    method = check_choice(method, "method", METHODS)
    loopy_sampler_limit = check_count(loopy_sampler_limit, "loopy_sampler_limit", 0)
    lo, hi = check_thresholds(DEFAULT_NEGATIVE_BELOW if rule.low is None else rule.low,
                              DEFAULT_POSITIVE_ABOVE if rule.high is None else rule.high)
    damping, tolerance, max_sweeps = check_bp_options(damping, tolerance, max_sweeps)
    exact_limit = check_count(exact_limit, "exact_limit")
    check_seed(seed)  # a bad seed fails before any work
    if run.n_samples == 0:
        raise InputError("there are no samples to decode: the layout is empty and no samples file "
                         "lists any", run.sources.get("layout"))
    lik_ptr, loglik = run.log_likelihood(assay)
    _check_pools_possible(run, lik_ptr, loglik)
    shared = (gibbs_options or {}).get("prevalence_prior") is not None
    if shared and method not in ("auto", "gibbs"):
        raise InputError('an unknown prevalence (gibbs_options["prevalence_prior"]) links every '
                         'sample; use method gibbs or auto',
                         parameters=('gibbs_options["prevalence_prior"]', "method"))
    if (method == "gibbs" and assay.ct is None) or shared:
        from .gibbs import decode_gibbs
        post = decode_gibbs(run, lik_ptr, loglik, lo, hi, seed, gibbs_options,
                            columns=sample_columns(run))
        if method != "gibbs":
            post.warnings.append("an unknown prevalence links every sample: decoded by the Gibbs "
                                 "sampler")
        return _judge(run, assay, post, rule, (lik_ptr, loglik), None, seed, expectations,
                      model_check)
    comps = components(run)
    problem = DecodeProblem(run, lik_ptr, loglik, comps)
    choice = choose_decoders(run, comps, method, exact_limit)
    options = DecodeOptions(lo, hi, exact_limit=exact_limit, damping=damping,
                            tolerance=tolerance, max_sweeps=max_sweeps, progress=progress,
                            seed=seed, gibbs_options=gibbs_options, exact_memo=exact_memo)
    decoders = PART_DECODERS
    if assay.ct is not None:  # shared Cts: joint enumeration where affordable (decode.ct_decode)
        from .ct_decode import CtShared, ct_exact_part, ct_gibbs_part
        options = replace(options, ct=CtShared.build(run, assay, comps, method, choice))
        decoders = {**PART_DECODERS, "exact": ct_exact_part, "gibbs": ct_gibbs_part}
    parts = []
    for name in [m for m in decoders if (choice.method == m).any()]:
        part = decoders[name](problem, choice.components(name), options)
        parts.append(part)
        loopy = np.zeros(0, dtype=np.int64)
        if method == "auto" and name == "bp" and assay.ct is None and choice.tree is not None:
            loopy = loopy_for_sampler(comps, part.components, choice.tree, part.unconverged,
                                      loopy_sampler_limit)
        if not len(part.unconverged) and not len(loopy):
            continue
        fallback = fallback_decoder(method, part) if len(part.unconverged) else _gibbs_part
        if fallback is None:
            part.warnings.append(_not_converged(part, comps, None))
            continue
        why = ["belief propagation did not converge"] if len(part.unconverged) else []
        if len(loopy):
            why.append(f"{len(loopy)} loopy group(s) where belief propagation is approximate, "
                       "sampled from its answer")
        redo_set = np.union1d(part.unconverged, loopy).astype(np.int64)
        redo = fallback(problem, redo_set, options, why=" and ".join(why),
                        start=part.probability)
        choice.method[redo_set] = redo.method
        if len(part.unconverged):
            part.warnings.append(_not_converged(part, comps, f"re-decoded by {redo.method}"))
        if len(loopy):
            redo.diagnostics["loopy_check"] = loopy_check(part.probability, redo,
                                                          _samples_of(comps, loopy), len(loopy))
        parts.append(redo)
    resampled = [p for p in parts if "loopy_check" in p.diagnostics]
    if resampled:
        c = resampled[0].diagnostics["loopy_check"]
        choice = DecoderChoice(choice.method, f"{choice.text}; then the Gibbs sampler re-decoded "
                               f"{c['groups']} loopy group(s) ({c['samples']} samples) from BP's "
                               "answer", choice.tree)
    post = _assemble(run, comps, choice, parts, lo, hi)
    if assay.ct is not None:
        from .ct_decode import finish_ct
        finish_ct(post, run, assay, options, choice)
    return _judge(run, assay, post, rule, (lik_ptr, loglik), comps, seed, expectations,
                  model_check)


def _judge(run, assay, post: Posterior, rule, lik, comps, seed, expectations: bool,
           model_check: bool) -> Posterior:
    """Calls by ``rule``, what the batch can expect of them, and the model check."""
    post.rule = rule
    if expectations:
        from ..decisions import batch_expectation, batch_warnings
        post.batch = batch_expectation(run, assay, post, lik=lik, comps=comps).summary()
        post.warnings.extend(batch_warnings(post.batch, rule))
    if model_check:
        from ..modelcheck import check_model
        check = check_model(run, assay, seed=seed)
        post.model_check = check.summary()
        post.warnings.extend(check.warnings)
    return post


def _not_converged(part: DecodedPart, comps: Components, remedy: str | None) -> str:
    bp = part.bp
    n_bad = len(part.unconverged)
    n_samples = int(comps.sizes[part.unconverged].sum())
    res = finite_or_none(bp.residual)
    head = (f"WARNING: belief propagation did not converge on {n_bad} of {len(part.components)} "
            f"group(s) of linked samples ({n_samples} samples) within {bp.sweeps} sweeps "
            f"(largest message change {res if res is None else format(res, '.3g')}, tolerance "
            f"{bp.tolerance:g})")
    if remedy:
        return f"{head}; {remedy}"
    from ..result_protocol import spell
    hint = (f"raise {spell('max_sweeps')} or {spell('damping')} (e.g. 0.5), or use "
            f"{spell('method')} gibbs")
    return f"{head}; their probabilities are unreliable: {hint}"


def _overall_converged(parts: list, choice: DecoderChoice) -> bool:
    """False when some component's final answer comes from a decoder that reports it did not
    converge (enumeration needs no iteration; components re-decoded by a fallback take the
    fallback's verdict)."""
    for p in parts:
        if p.converged is not False:
            continue
        doubtful = p.unconverged if len(p.unconverged) else p.components
        if (choice.method[doubtful] == p.method).any():
            return False
    return True


def _assemble(run: Run, comps: Components, choice: DecoderChoice, parts: list, lo: float,
              hi: float) -> Posterior:
    n = run.n_samples
    prob = np.array(run.prior, dtype=float)
    sample_method = np.empty(n, dtype=object)
    for part in parts:  # a fallback part comes after the part it corrects, and overrides it
        prob[part.samples] = part.probability[part.samples]
        sample_method[part.samples] = part.method
        if part.method == "bp" and choice.tree is not None:  # auto: where BP stays approximate
            loopy = part.components[~choice.tree[part.components]]
            if len(loopy):
                sample_method[_samples_of(comps, loopy)] = "bp-loopy"
    # specimens re-decoded by a later part (a fallback) were set again above, in order
    final = [p for p in parts if (choice.method[p.components] == p.method).any()]
    log_evidence = dist = None
    if all(p.log_z is not None for p in final):
        log_evidence = float(sum(float(p.log_z.sum()) for p in final))
    if all(p.count_parts is not None for p in final):
        dist = count_distribution([cp for p in final for cp in p.count_parts], n)
    mcse = None
    if any(p.mcse is not None for p in parts):
        mcse = np.zeros(n)
        for p in parts:
            if p.mcse is not None:
                mcse[p.samples] = p.mcse[p.samples]
    draws = next((p.draws for p in parts if p.draws is not None and len(p.samples) == n), None)
    names = list(dict.fromkeys(p.method for p in final))
    sizes = comps.sizes
    diagnostics = {"components": int(comps.n_components),
                   "largest_component": int(sizes.max()) if len(sizes) else 0,
                   "choice": choice.text,
                   "decoders": {m: {"components": int((choice.method == m).sum()),
                                    "samples": int(sizes[choice.method == m].sum())}
                                for m in names}}
    diagnostics["converged"] = _overall_converged(parts, choice)
    diagnostics["bp_loopy_samples"] = int((sample_method == "bp-loopy").sum())
    bp = next((p for p in parts if p.method == "bp"), None)
    if bp is not None:
        diagnostics["bp"] = bp.diagnostics
        diagnostics.update(sweeps=int(bp.bp.sweeps), residual=finite_or_none(bp.bp.residual))
    else:
        diagnostics.update(sweeps=0, residual=0.0)
    for p in parts:
        for key, value in p.diagnostics.items():
            if p.method != "bp":
                diagnostics.setdefault(p.method, {})[key] = value
    groups = diagnostics.get("gibbs", {}).pop("ambiguity_groups", None)
    if groups is not None:  # joint answers of the sampler's part, where the report looks
        diagnostics["ambiguity_groups"] = groups
    warnings = list(run.notes) + [w for p in parts for w in p.warnings]
    check = diagnostics.get("gibbs", {}).pop("loopy_check", None)
    if check is not None:
        diagnostics["loopy_check"] = check
    if diagnostics["bp_loopy_samples"]:
        warnings.append(f"{diagnostics['bp_loopy_samples']} sample(s) in loopy groups too large "
                        "to enumerate or to sample were decoded by belief propagation, which is "
                        "approximate there even when it converges (method bp-loopy)"
                        + (f"; {check_text(check)}" if check is not None else
                           "; no loopy group was small enough to check it against the sampler"))
    return Posterior(run.sample_ids, prob, run.prior, "+".join(names) or "exact", sample_method,
                     lo, hi, log_evidence=log_evidence, mcse=mcse, count_distribution=dist,
                     draws=draws, diagnostics=diagnostics, columns=sample_columns(run),
                     warnings=warnings)
