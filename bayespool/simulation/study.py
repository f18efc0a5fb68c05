"""A study as the command line states it: lists of schemes, prevalences, pool sizes, assays and
thresholds. One setting is a :func:`~bayespool.simulation.simulate` (its own cohort seeds, the
numbers ``simulate --json`` promises); several are a :func:`~bayespool.simulation.sweep` (common
random numbers across settings).

:func:`check_study` checks every option before any work, so a cluster is not started for a study
that cannot run; :func:`run_study` then plays it.
"""
from __future__ import annotations

from ..errors import InputError
from ..validation import check_count, check_open_probability
from .protocols import accepted_options, make_protocol

SCALARS = ("rows", "cols", "tests", "method", "target_sensitivity", "max_false_discovery")


def _values(value) -> list:
    """A list option as a list (None: not given)."""
    return [] if value is None else list(value)


def check_study(schemes, *, prevalences=None, pool_sizes=None, negative_below=None,
                positive_above=None, runs: int = 1000, **options) -> None:
    """Check a study's options against its schemes before any work.

    Parameters
    ----------
    schemes : list of str
        Registered protocol names; an unknown one is an error.
    prevalences, pool_sizes, negative_below, positive_above : list, optional
        The swept values (one value is a list of one).
    runs : int
        Simulated cohorts per setting.
    **options
        Protocol options given once (``rows``, ``cols``, ``tests``, ``method``,
        ``target_sensitivity``, ``max_false_discovery``, ``max_pool_size``).

    Raises
    ------
    InputError
        An unknown scheme, an option that no scheme of the study takes, or a value a protocol
        refuses, naming the Python parameter.

    Examples
    --------
    >>> check_study(["individual"], pool_sizes=[4])
    Traceback (most recent call last):
    ...
    bayespool.errors.InputError: pool_size does not apply to the individual scheme
    """
    accepted = {s: accepted_options(s) for s in schemes}  # unknown schemes fail here
    given = {"pool_size": pool_sizes, **{k: options.get(k) for k in SCALARS}}
    for option, value in given.items():
        if value is not None and not any(a is None or option in a for a in accepted.values()):
            raise InputError(f"`{option}` does not apply to the {', '.join(schemes)} "
                             f"scheme{'s' if len(accepted) > 1 else ''}")
    for scheme in schemes:  # each protocol checks its own options
        for k in _values(pool_sizes) or [None]:
            for lo in _values(negative_below) or [None]:
                for hi in _values(positive_above) or [None]:
                    make_protocol(scheme, pool_size=k, negative_below=lo, positive_above=hi,
                                  **options)
    for p in _values(prevalences):
        check_open_probability(p, "prevalence")
    check_count(runs, "runs")


def single_setting(schemes, *, prevalences=None, pool_sizes=None, assays=None,
                   negative_below=None, positive_above=None) -> bool:
    """True when the study has one setting: every list holds at most one value."""
    return all(v is None or len(v) <= 1 for v in (schemes, prevalences, pool_sizes,
                                                   None if assays is None else list(assays),
                                                   negative_below, positive_above))


def run_study(schemes, samples, *, prevalences=None, pool_sizes=None, assays=None,
              negative_below=None, positive_above=None, runs: int = 1000, seed=None,
              progress=False, client=None, on_estimate=None, **options):
    """Play a study: one setting with :func:`simulate`, several with :func:`sweep`.

    Parameters
    ----------
    schemes : list of str
        Protocol names.
    samples : int, str or Specimens
        Specimens per cohort, or a samples file.
    prevalences, pool_sizes, negative_below, positive_above : list, optional
        The swept values.
    assays : dict label -> Assay, optional
        The assays (one: no assay column in the table; default: the default assay).
    runs, seed, progress, client, on_estimate
        As in :func:`~bayespool.simulation.simulate`.

    Returns
    -------
    Simulation or Sweep
        A Simulation for one setting, else the Sweep; ``str()`` of either is what
        ``bayespool simulate`` prints.

    Examples
    --------
    >>> run_study(["individual"], 20, prevalences=[0.1], runs=5, seed=1).scheme
    'individual'
    """
    from .simulator import simulate, sweep
    where = {"runs": runs, "seed": seed, "progress": progress, "client": client,
             "on_estimate": on_estimate}
    assays = dict(assays or {None: None})
    if single_setting(schemes, prevalences=prevalences, pool_sizes=pool_sizes, assays=assays,
                      negative_below=negative_below, positive_above=positive_above):
        [assay] = assays.values()
        first = {"prevalence": prevalences, "pool_size": pool_sizes,
                 "negative_below": negative_below, "positive_above": positive_above}
        first = {k: v[0] if v else None for k, v in first.items()}
        prevalence = first.pop("prevalence")
        return simulate(schemes[0], samples, prevalence=prevalence, assay=assay, **first,
                        **where, **options)
    many = len(assays) > 1
    sizes = pool_sizes
    return sweep(schemes, samples, prevalences=prevalences,
                 pool_sizes=sizes if sizes and len(sizes) > 1 else None,
                 assay=None if many else next(iter(assays.values())),
                 assays=assays if many else None, negative_below=negative_below,
                 positive_above=positive_above,
                 **({"pool_size": sizes[0]} if sizes and len(sizes) == 1 else {}),
                 **where, **options)
