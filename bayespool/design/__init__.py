"""Non-adaptive pooling designs and Dorfman's closed forms.

Each scheme is a function returning a :class:`Design` (``.layout`` the ``pool,sample`` table,
``.properties`` its numbers): :func:`dorfman_design`, :func:`array_design`,
:func:`kautz_singleton_design`, :func:`random_design`, :func:`code_design` (codewords of an
error-correcting code); :func:`make_design` picks one by name.
"""
from __future__ import annotations

from .array import array_design
from .base import Design, DesignProperties
from .code import code_design, nearest_specimen
from .closed_form import (DorfmanExpectation, DorfmanOptimum, dorfman_cohort_expected,
                          dorfman_expected,
                          dorfman_tests_per_specimen, individual_expected, optimal_dorfman)
from .disjunct import noiseless_decode, pool_results
from .dorfman import dorfman_design
from .kautz_singleton import kautz_singleton_design
from .random_design import random_design
from .specimens import Specimens, specimens

SCHEMES = {
    "dorfman": dorfman_design,
    "array": array_design,
    "kautz-singleton": kautz_singleton_design,
    "random": random_design,
    "code": code_design,
}

__all__ = ["Design", "DesignProperties", "SCHEMES", "make_design", "dorfman_design", "array_design",
           "kautz_singleton_design", "random_design", "code_design", "nearest_specimen", "noiseless_decode", "pool_results",
           "dorfman_expected", "dorfman_cohort_expected", "individual_expected",
           "dorfman_tests_per_specimen",
           "optimal_dorfman", "DorfmanExpectation", "DorfmanOptimum", "Specimens", "specimens"]


def make_design(scheme: str, samples, **options) -> Design:
    """Build the named pooling design.

    Parameters
    ----------
    scheme : {"dorfman", "array", "kautz-singleton", "random", "code"}
        The design.
    samples : int, str or path-like
        The number of specimens (IDs S0001, ...) or a samples file.
    **options
        The scheme's keyword arguments: ``pool_size``, ``fill``, ``by_risk`` (dorfman); ``rows``,
        ``cols`` (array); ``positives``, ``q``, ``dimension``, ``length`` (kautz-singleton);
        ``pools_per_sample``, ``pools``, ``seed`` (random); ``errors``, ``code`` (code); and
        ``max_pool_size`` for all.

    Returns
    -------
    Design
        The layout (``to_frame()``, one row per membership) and its properties.

    Raises
    ------
    InputError
        The scheme is not one of the five, or an option is out of range (the message names it).

    References
    ----------
    Dorfman (1943), Ann. Math. Statist. 14(4); Kautz & Singleton (1964), IEEE Trans. Inf. Theory
    10(4); Hamming and BCH codes: MacWilliams & Sloane (1977), The Theory of Error-Correcting
    Codes.

    Examples
    --------
    >>> import bayespool
    >>> design = bayespool.make_design("dorfman", 20, pool_size=4)
    >>> design.properties.n_pools, design.to_frame().iloc[0].tolist()
    (5, ['D001', 'S0001'])
    """
    from ..errors import InputError
    if scheme not in SCHEMES:
        raise InputError(f"unknown design scheme {scheme!r} (choose one of {', '.join(SCHEMES)})")
    return SCHEMES[scheme](samples, **options)
