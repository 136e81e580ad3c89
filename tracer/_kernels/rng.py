"""The counter-based random generator: a pure function of (seed, pixel, sample, dimension).

Each draw chains the splitmix64 finaliser (Steele, Lea and Flood, "Fast splittable
pseudorandom number generators", OOPSLA 2014) through the four counters, so a number never
depends on threads, tile order, workers or resume points. Floats take the top 53 bits.
"""

import numpy as np
from numba import njit

from ..config import JIT

_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_MUL1 = np.uint64(0xBF58476D1CE4E5B9)
_MUL2 = np.uint64(0x94D049BB133111EB)
_S30 = np.uint64(30)
_S27 = np.uint64(27)
_S31 = np.uint64(31)
_S11 = np.uint64(11)
_TO_UNIT = 1.0 / 9007199254740992.0  # 2**-53


@njit(**JIT)
def mix64(z):
    """splitmix64 finaliser of a uint64."""
    z = (z ^ (z >> _S30)) * _MUL1
    z = (z ^ (z >> _S27)) * _MUL2
    return z ^ (z >> _S31)


@njit(**JIT)
def uniform(seed, pixel, sample, dimension):
    """A float64 in [0, 1) for the counters (all uint64 or non-negative ints)."""
    h = mix64(np.uint64(seed) + _GOLDEN)
    h = mix64(h ^ np.uint64(pixel))
    h = mix64(h ^ np.uint64(sample))
    h = mix64(h ^ np.uint64(dimension))
    return (h >> _S11) * _TO_UNIT


@njit(**JIT)
def path_key(seed, pixel, sample):
    """The counters' hash before the dimension: ``uniform_at(path_key(s, p, n), d) == uniform(s, p, n, d)``,
    so a loop drawing many dimensions of one path hashes its first three counters once."""
    h = mix64(np.uint64(seed) + _GOLDEN)
    h = mix64(h ^ np.uint64(pixel))
    return mix64(h ^ np.uint64(sample))


@njit(**JIT)
def uniform_at(key, dimension):
    """:func:`uniform` from a :func:`path_key`: the same number."""
    return (mix64(np.uint64(key) ^ np.uint64(dimension)) >> _S11) * _TO_UNIT


def mix64_numpy(z: np.ndarray) -> np.ndarray:
    z = np.asarray(z, dtype=np.uint64)
    with np.errstate(over="ignore"):
        z = (z ^ (z >> _S30)) * _MUL1
        z = (z ^ (z >> _S27)) * _MUL2
    return z ^ (z >> _S31)


def uniform_numpy(seed, pixel, sample, dimension) -> np.ndarray:
    """The same numbers as :func:`uniform`, vectorised in NumPy (broadcasting counters)."""
    with np.errstate(over="ignore"):
        h = mix64_numpy(np.uint64(seed) + _GOLDEN)
    h = mix64_numpy(h ^ np.asarray(pixel, dtype=np.uint64))
    h = mix64_numpy(h ^ np.asarray(sample, dtype=np.uint64))
    h = mix64_numpy(h ^ np.asarray(dimension, dtype=np.uint64))
    return (h >> _S11).astype(np.float64) * _TO_UNIT
