"""Per-chain random numbers for the numba kernels: xoroshiro128+ and what is built on it.

Each chain owns two uint64 words of state, seeded from a ``numpy.random.Generator``, so a run is
reproducible whatever the thread that runs the chain. Generator: Blackman & Vigna (2018), Scrambled
linear pseudorandom number generators (xoroshiro128+, rotations 24, 16, 37). Gamma variates by
Marsaglia & Tsang (2000), A simple method for generating gamma variables, ACM TOMS 26(3).
"""
from __future__ import annotations

import numpy as np
from numba import njit

_R24 = np.uint64(24)
_R40 = np.uint64(40)
_R37 = np.uint64(37)
_R27 = np.uint64(27)
_S16 = np.uint64(16)
_S11 = np.uint64(11)
_TO_UNIT = 1.0 / 9007199254740992.0  # 2**-53


def seed_states(rng: np.random.Generator, n_chains: int) -> np.ndarray:
    """(n_chains, 2) uint64 states drawn from ``rng`` (never all zero)."""
    state = rng.integers(1, np.iinfo(np.int64).max, size=(n_chains, 2), dtype=np.int64)
    return state.astype(np.uint64)


@njit(cache=True, inline="always")
def next_uniform(s0, s1):
    """One xoroshiro128+ step on state words held in registers: (double in [0, 1), s0, s1)."""
    result = s0 + s1
    s1 ^= s0
    n0 = ((s0 << _R24) | (s0 >> _R40)) ^ s1 ^ (s1 << _S16)
    n1 = (s1 << _R37) | (s1 >> _R27)
    return np.float64(result >> _S11) * _TO_UNIT, n0, n1


@njit(cache=True, inline="always")
def uniform(state):
    """A double in [0, 1) from the 53 high bits of xoroshiro128+; advances ``state`` in place."""
    u, state[0], state[1] = next_uniform(state[0], state[1])
    return u


@njit(cache=True)
def below(state, n):
    """A uniform integer in 0..n-1."""
    j = np.int64(uniform(state) * n)
    return j if j < n else n - 1


@njit(cache=True)
def normal(state):
    """A standard normal variate (polar Box-Muller, one of the pair used)."""
    while True:
        u = 2.0 * uniform(state) - 1.0
        v = 2.0 * uniform(state) - 1.0
        s = u * u + v * v
        if 0.0 < s < 1.0:
            return u * np.sqrt(-2.0 * np.log(s) / s)


@njit(cache=True)
def gamma(state, shape):
    """A Gamma(shape, 1) variate, Marsaglia-Tsang; shape < 1 by the U**(1/shape) boost."""
    boost = 1.0
    if shape < 1.0:
        u = uniform(state)
        while u == 0.0:
            u = uniform(state)
        boost = u ** (1.0 / shape)
        shape += 1.0
    d = shape - 1.0 / 3.0
    c = 1.0 / np.sqrt(9.0 * d)
    while True:
        z = normal(state)
        v = 1.0 + c * z
        if v <= 0.0:
            continue
        v = v * v * v
        u = uniform(state)
        if u > 0.0 and np.log(u) < 0.5 * z * z + d - d * v + d * np.log(v):
            return d * v * boost


@njit(cache=True)
def beta(state, a, b):
    """A Beta(a, b) variate as G_a / (G_a + G_b)."""
    x = gamma(state, a)
    y = gamma(state, b)
    return x / (x + y)
