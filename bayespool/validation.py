"""The one place where options given to public functions are checked.

Every check takes the value and the name of the Python parameter it was given as, returns the value
in its working type, and raises :class:`~bayespool.errors.InputError` whose message starts with that
name (``damping must be at least 0 and below 1, got 2``) and whose ``parameters`` list it. The
command line maps parameter names to its flags in one table (``bayespool.cli.FLAGS``), so its users
read ``--damping`` in the same message. Files are checked where they are read (with file, line and
column); this module is for values.
"""
from __future__ import annotations

import math
from numbers import Integral, Real

import numpy as np

from .errors import InputError

__all__ = ["check_probability", "check_open_probability", "check_count", "check_positive",
           "check_nonnegative", "check_number", "check_fraction", "check_choice", "check_seed",
           "check_thresholds", "seed_sequence", "parameter_error"]


def parameter_error(message: str, *names: str) -> InputError:
    """An :class:`InputError` about the given Python parameters (named in ``message``)."""
    return InputError(message, parameters=names)


def check_number(value, name: str) -> float:
    """A finite real number (bools, strings, NaN and infinities refused)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (Real, np.number)):
        try:  # numeric strings from a front end that passes text through
            if not isinstance(value, str):
                raise TypeError
            v = float(value)
        except (TypeError, ValueError):
            raise parameter_error(f"`{name}` must be a number, got {value!r}", name) from None
    else:
        v = float(value)
    if not math.isfinite(v):
        raise parameter_error(f"`{name}` must be a finite number, got {value!r}", name)
    return v


def check_open_probability(value, name: str) -> float:
    """A probability strictly between 0 and 1, such as a prevalence or a call threshold."""
    try:
        v = check_number(value, name)
    except InputError:
        raise parameter_error(f"`{name}` must be a number strictly between 0 and 1, got {value!r}",
                              name) from None
    if not 0.0 < v < 1.0:
        raise parameter_error(f"`{name}` must be strictly between 0 and 1, got {value!r}", name)
    return v


def check_probability(value, name: str) -> float:
    """A probability in [0, 1] (0 and 1 are allowed: Se or Sp of 1 is handled exactly)."""
    v = check_number(value, name)
    if not 0.0 <= v <= 1.0:
        raise parameter_error(f"`{name}` must be between 0 and 1, got {value!r}", name)
    return v


def check_fraction(value, name: str) -> float:
    """A number in [0, 1), such as a damping factor."""
    v = check_number(value, name)
    if not 0.0 <= v < 1.0:
        raise parameter_error(f"`{name}` must be at least 0 and below 1, got {value!r}", name)
    return v


def check_positive(value, name: str) -> float:
    """A finite number > 0."""
    try:
        v = check_number(value, name)
    except InputError:
        v = float("nan")
    if not v > 0.0:
        raise parameter_error(f"`{name}` must be a positive number, got {value!r}", name)
    return v


def check_nonnegative(value, name: str) -> float:
    """A finite number >= 0."""
    try:
        v = check_number(value, name)
    except InputError:
        v = float("nan")
    if not v >= 0.0:
        raise parameter_error(f"`{name}` must be a number >= 0, got {value!r}", name)
    return v


def check_count(value, name: str, minimum: int = 1) -> int:
    """A whole number >= ``minimum`` (``4.0`` and ``"4"`` pass, ``4.5``, ``True`` and ``"x"`` not)."""
    if isinstance(value, (bool, np.bool_)):
        raise parameter_error(f"`{name}` must be a whole number, got {value!r}", name)
    if isinstance(value, (Integral, np.integer)):
        v = int(value)
    else:
        try:
            v = int(value)
        except (TypeError, ValueError, OverflowError):
            raise parameter_error(f"`{name}` must be a whole number, got {value!r}", name) from None
        if v != value and not (isinstance(value, str) and str(v) == value.strip()):
            raise parameter_error(f"`{name}` must be a whole number, got {value!r}", name)
    if v < minimum:
        raise parameter_error(f"`{name}` must be at least {minimum}, got {v}", name)
    return v


def check_choice(value, name: str, choices) -> str:
    """One of ``choices`` (strings), or an error listing them."""
    choices = tuple(choices)
    if not isinstance(value, str) or value not in choices:
        raise parameter_error(f"unknown `{name}` {value!r} (choose one of {', '.join(choices)})",
                              name)
    return value


def check_thresholds(negative_below, positive_above) -> tuple[float, float]:
    """Call thresholds with 0 < negative_below <= positive_above < 1."""
    lo = check_open_probability(negative_below, "negative_below")
    hi = check_open_probability(positive_above, "positive_above")
    if lo > hi:
        raise parameter_error(f"`negative_below` ({lo:g}) must not exceed `positive_above` ({hi:g})",
                              "negative_below", "positive_above")
    return lo, hi


def _check_seed_value(seed, name: str):
    if seed is None or isinstance(seed, (np.random.Generator, np.random.SeedSequence)):
        return seed
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (Integral, np.integer)):
        raise parameter_error(f"`{name}` must be a whole number >= 0, a numpy.random.Generator or "
                              f"None, got {seed!r}", name)
    if seed < 0:
        raise parameter_error(f"`{name}` must be a whole number >= 0, got {seed!r}", name)
    return int(seed)


def check_seed(seed, name: str = "seed") -> np.random.Generator:
    """A random generator from a seed: a whole number >= 0 (reproducible), a
    ``numpy.random.Generator`` (used as is) or None (fresh entropy: not reproducible)."""
    seed = _check_seed_value(seed, name)
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(seed)


def seed_sequence(seed, name: str = "seed") -> np.random.SeedSequence:
    """A ``SeedSequence`` for code that spawns independent streams (whole number, Generator,
    SeedSequence or None, as :func:`check_seed`)."""
    seed = _check_seed_value(seed, name)
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, np.random.Generator):
        return np.random.SeedSequence(int(seed.integers(2 ** 63)))
    return np.random.SeedSequence(seed)
