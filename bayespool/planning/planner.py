"""``plan``: decode if needed, draw, build candidates, pick the batch, name the new pools."""
from __future__ import annotations

import dataclasses

import numpy as np

from ..decoders.graph import components
from ..csr import CSR
from ..defaults import METHODS, NEGATIVE_BELOW, POSITIVE_ABOVE
from ..errors import InputError
from ..validation import (check_choice, check_count, check_nonnegative, check_positive,
                          check_seed, check_thresholds)
from .candidates import generate
from . import (DEFAULT_DRAWS, DEFAULT_MAX_LINKED, DEFAULT_MAX_POOL_SIZE, DEFAULT_MIN_INFORMATION,
               DEFAULT_TESTS)
from .draws import posterior_draws
from .greedy import select_batch
from .ids import fresh_pool_ids
from .information import readout_table
from .result import Plan

UNLIMITED = np.iinfo(np.int64).max // 4

def _draws_left(run, max_draws) -> np.ndarray:
    """How many more times each specimen may be drawn: the option, and a samples-file column."""
    if max_draws is None:
        left = np.full(run.n_samples, UNLIMITED, dtype=np.int64)
    elif np.ndim(max_draws) == 0:
        left = np.full(run.n_samples, check_count(max_draws, "max_draws", 0), dtype=np.int64)
    else:
        left = np.array(max_draws, dtype=np.int64)
        if left.shape != (run.n_samples,) or (left < 0).any():
            raise InputError(f"max_draws must be one whole number >= 0 or one per specimen "
                             f"({run.n_samples})", parameters=("max_draws",))
    sm = run.samples
    if sm is not None and "draws_left" in sm.columns:
        raw = sm["draws_left"].astype(str).str.strip()
        given = (raw != "").to_numpy()
        vals = np.array([int(v) if v.isdigit() else -1 for v in raw[given]], dtype=np.int64)
        if (vals < 0).any():
            bad = raw[given].iloc[int(np.flatnonzero(vals < 0)[0])]
            raise InputError(f"draws_left {bad!r} must be a whole number >= 0",
                             run.sources.get("samples"), column="draws_left")
        idx = sm.index.to_numpy()[given]
        left[idx] = np.minimum(left[idx], vals)
    return left


def _volume_left(run, pool_volume) -> np.ndarray | None:
    """Microlitres each specimen has (the samples file's ``volume_ul``; no limit where blank), or
    None when the plan does not track volume."""
    if pool_volume is None:
        return None
    pool_volume = check_positive(pool_volume, "pool_volume")
    sm = run.samples
    if sm is None or "volume_ul" not in sm.columns:
        return None
    from ..worklist import specimen_volumes
    have = specimen_volumes(sm, run.sample_ids[sm.index.to_numpy()], run.sources.get("samples"))
    left = np.full(run.n_samples, np.inf)
    given = ~np.isnan(have)
    left[sm.index.to_numpy()[given]] = have[given]
    return left


def untested(run) -> np.ndarray:
    """True for specimens in no read pool: a prior alone never decides a specimen, however low."""
    read = np.repeat(run.pool_read, run.pool_size)
    return np.bincount(run.pool_members[read], minlength=run.n_samples) == 0


def plan(run, assay, *, posterior=None, tests: int = DEFAULT_TESTS,
         max_pool_size: int = DEFAULT_MAX_POOL_SIZE, max_draws=None,
         negative_below: float | None = None, positive_above: float | None = None,
         n_draws: int = DEFAULT_DRAWS, seed=None, min_information: float = DEFAULT_MIN_INFORMATION,
         relative_information: float = 0.0, max_linked: int = DEFAULT_MAX_LINKED,
         method: str = "auto", draws: np.ndarray | None = None, id_prefix: str = "B",
         replicates_use_material: bool = False, pool_volume: float | None = None,
         target_sensitivity: float | None = None,
         max_false_discovery: float | None = None, exact_memo=None) -> Plan:
    """Plan up to ``tests`` pools of at most ``max_pool_size`` undecided specimens.

    Undecided: probability between the thresholds, or in no read pool yet (so a first stage at a
    prevalence below ``negative_below`` still tests everyone).

    ``posterior``: the run's decoded posterior (decoded here with ``method`` when None).
    ``max_draws``: how many more times a specimen may be drawn in this batch (specimen volume), one
    number or one per specimen; a ``draws_left`` column of the samples file sets it per specimen.
    Replicate reads re-use an existing pool's mix and draw nothing, unless
    ``replicates_use_material`` (each reading takes a fresh aliquot of every member).
    ``pool_volume``: microlitres per pool when pools are built by equal-volume transfers (the
    worklist); with a ``volume_ul`` column in the samples file, no specimen is then drawn beyond
    the volume it has (a pool of k takes ``pool_volume / k`` of each member). ``max_linked``
    bounds the group of specimens that a planned pool links together by joining groups (so the next
    decode stays exact); tests within one existing group are always allowed. ``min_information``:
    stop when the best remaining test is expected to tell fewer bits; ``relative_information``: or
    fewer than that fraction of the first pick. ``draws``: joint posterior draws (draws x specimens)
    to use instead of making them. ``seed``: reproducible draws. ``target_sensitivity`` and
    ``max_false_discovery``: batch targets (:mod:`bayespool.decisions`); the planner keeps choosing
    tests while they leave specimens inconclusive. ``exact_memo``: an
    :class:`~bayespool.decoders.exact.ExactMemo` kept across rounds (the closed loop), so components
    drawn before are not enumerated again (the same draws).

    Parameters
    ----------
    run : Run
        The run so far; an empty layout with a samples file plans a first stage.
    assay : Assay
        Specificity and Se(k, d).
    posterior : Posterior, optional
        The run's decoded posterior.
    tests : int
        At most this many pools (one readout each).
    max_pool_size : int
        At most this many specimens per pool.
    seed : int or numpy.random.Generator, optional
        Random seed of the posterior draws (reproducible plans).
    n_draws : int
        Joint posterior draws the information is estimated over.

    Returns
    -------
    Plan
        The planned pools (``to_frame()``: the layout of the next tests, one row per membership).

    Raises
    ------
    InputError
        A bad option (naming the parameter), or an assay that covers no allowed pool size.

    References
    ----------
    Expected information gain estimated on joint posterior draws, chosen greedily (Bayesian
    sequential experimental design; for pooled tests e.g. Cuturi, Teboul & Vert (2020),
    arXiv:2004.12508).

    Examples
    --------
    >>> import bayespool
    >>> run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
    ...                          "datasets/demo/samples.csv")
    >>> assay = bayespool.read_assay("datasets/demo/assay.toml")
    >>> nxt = bayespool.plan(run, assay, tests=4, seed=1)
    >>> nxt.n_tests, list(nxt.to_frame().columns[:2])
    (4, ['pool', 'sample'])
    """
    tests = check_count(tests, "tests", 1)
    max_pool_size = check_count(max_pool_size, "max_pool_size", 1)
    max_linked = check_count(max_linked, "max_linked", 1)
    n_draws = check_count(n_draws, "n_draws", 10)
    min_information = check_nonnegative(min_information, "min_information")
    relative_information = check_nonnegative(relative_information, "relative_information")
    method = check_choice(method, "method", METHODS)
    check_seed(seed)  # a bad seed fails before any work
    targets = {"target_sensitivity": target_sensitivity,
               "max_false_discovery": max_false_discovery}
    if posterior is None:
        from ..decoders import decode
        posterior = decode(run, assay, method=method, negative_below=negative_below,
                           positive_above=positive_above, seed=seed, expectations=False,
                           model_check=False, **targets)
    else:
        if len(posterior.probability) != run.n_samples:
            raise InputError("the posterior does not belong to this run (different specimens)")
        given = {"negative_below": negative_below, "positive_above": positive_above, **targets}
        given = {k: v for k, v in given.items() if v is not None}
        if given:
            rule = dataclasses.replace(posterior.decision_rule, **given)
            lo, hi = check_thresholds(NEGATIVE_BELOW if rule.low is None else rule.low,
                                      POSITIVE_ABOVE if rule.high is None else rule.high)
            posterior = dataclasses.replace(posterior, negative_below=lo, positive_above=hi,
                                            rule=rule)
    prob = np.asarray(posterior.probability, dtype=float)
    undecided = np.union1d(posterior.undecided(), np.flatnonzero(untested(run)))
    calls = posterior.counts()
    notes: list = []
    kmax = max(max_pool_size, int(run.pool_size.max()) if run.n_pools else 1)
    qtab = readout_table(assay, kmax)
    allowed = ~np.isnan(qtab[:, 0])
    if not undecided.size:
        return _empty(run, True, 0, "decided", notes, calls)
    if run.n_samples and not allowed[1:max_pool_size + 1].any():
        raise InputError(f"the assay covers no pool size up to {max_pool_size}",
                         run.sources.get("assay"))
    rng = check_seed(seed)
    if draws is None:
        draws = posterior_draws(run, assay, posterior, n_draws, rng, notes, memo=exact_memo)
    elif draws.ndim != 2 or draws.shape[1] != run.n_samples:
        raise InputError(f"draws must be an array of draws x {run.n_samples} specimens",
                         parameters=("draws",))
    xt = np.ascontiguousarray(np.asarray(draws, dtype=np.uint8).T)
    w = np.full(xt.shape[1], 1.0 / xt.shape[1])
    comps = components(run)
    cands = generate(run, prob, undecided, comps, max_pool_size, allowed)
    left = _draws_left(run, max_draws)
    volume = _volume_left(run, pool_volume)
    batch = select_batch(xt, w, cands, comps.sample_label, comps.sizes.astype(np.int64), qtab,
                         tests, left, max_linked, min_information, relative_information,
                         replicates_use_material, volume, pool_volume or 0.0)
    if not len(batch.chosen):
        notes.append("no candidate test is expected to tell anything within the limits "
                     "(material left, pool size, linked group size)")
        return _empty(run, False, len(undecided), batch.stop, notes, calls)
    chosen = batch.chosen
    if batch.stop == "information" and len(chosen) < tests:
        notes.append(f"planned {len(chosen)} of {tests} tests: the others would tell less than "
                     "the minimum information")
    return Plan(run.sample_ids, np.array(fresh_pool_ids(run.pool_ids, len(chosen), id_prefix),
                                         dtype=object),
                cands.pools.take(chosen), cands.kind[chosen], cands.source[chosen],
                batch.positive_probability, batch.gain, batch.total_information,
                len(undecided), False, run.pool_ids, batch.stop, xt.shape[1], notes, calls)


def _empty(run, decided: bool, undecided: int, stop: str, notes: list, calls: dict) -> Plan:
    z = np.zeros(0)
    return Plan(run.sample_ids, np.zeros(0, dtype=object), CSR.from_rows([]),
                np.zeros(0, dtype=np.int8),
                np.zeros(0, dtype=np.int64), z, z, 0.0, undecided, decided, run.pool_ids, stop,
                0, notes, calls)
