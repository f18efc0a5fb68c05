"""Checks of the surveillance functions' arguments; errors name the Python parameter (marked, so
the command line shows its flag instead)."""
from __future__ import annotations

import math

from ..errors import InputError


def check_level(level, name: str = "level") -> float:
    """A confidence level strictly between 0 and 1."""
    try:
        v = float(level)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a number strictly between 0 and 1, got {level!r}") from None
    if not 0.0 < v < 1.0:
        raise InputError(f"`{name}` must be strictly between 0 and 1, got {level!r}")
    return v


def check_positive(value, name: str) -> float:
    """A finite number above 0."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a positive number, got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"`{name}` must be a positive number, got {value!r}")
    return v


def check_beta_prior(prior, name: str = "prior") -> tuple[float, float]:
    """Two positive numbers (a, b) of a Beta prior."""
    try:
        a, b = (float(x) for x in prior)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be two positive numbers (a, b), got {prior!r}") from None
    if not (a > 0 and b > 0 and math.isfinite(a) and math.isfinite(b)):
        raise InputError(f"`{name}` must be two positive numbers (a, b), got {prior!r}")
    return a, b
