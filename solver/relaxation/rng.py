"""A small, fast pseudo-random generator for the particle kernels.

xoshiro256** (Blackman & Vigna, "Scrambled linear pseudorandom number
generators", ACM Trans. Math. Softw. 47 (2021) 36), state of four 64-bit
words held in a uint64 array that each replica owns; uniform doubles in
[0, 1) from the top 53 bits.  Seeds come from numpy's SeedSequence
(:func:`replica_states`), so a replica depends only on the point seed and its
index, never on threads or on other replicas.
"""

from __future__ import annotations

import math

import numpy as np
from numba import int64, njit, uint64

_INV_2_53 = 1.0 / 9007199254740992.0
_MASK32 = 0xFFFFFFFF


@njit(uint64(uint64, uint64), cache=True, inline="always")
def _rotl(x, k):
    return (x << k) | (x >> (uint64(64) - k))


@njit(cache=True, inline="always")
def next_u64(s: np.ndarray):
    """Advance the state s (uint64[4]) and return the next 64-bit output."""
    result = _rotl(s[1] * uint64(5), uint64(7)) * uint64(9)
    t = s[1] << uint64(17)
    s[2] ^= s[0]
    s[3] ^= s[1]
    s[1] ^= s[2]
    s[0] ^= s[3]
    s[2] ^= t
    s[3] = _rotl(s[3], uint64(45))
    return result


@njit(cache=True, inline="always")
def uniform(s: np.ndarray) -> float:
    """Uniform double in [0, 1)."""
    return float(next_u64(s) >> uint64(11)) * _INV_2_53


@njit(cache=True, inline="always")
def distinct_pair(s: np.ndarray, n: int):
    """Indices (i, j), i != j, uniform over the ordered pairs of range(n), 2 <= n < 2**32.

    One 64-bit output gives both: i from its upper 32 bits over n values and
    j from its lower 32 bits over n - 1 values (then j += 1 if j >= i), each by
    multiply-and-shift with the rejection step that makes it exactly uniform
    (Lemire, "Fast random integer generation in an interval", ACM Trans. Model.
    Comput. Simul. 29 (2019) 3, Algorithm 5).
    """
    ni = uint64(n)
    nj = uint64(n - 1)
    mask = uint64(_MASK32)
    while True:
        x = next_u64(s)
        mi = (x >> uint64(32)) * ni
        mj = (x & mask) * nj
        li = mi & mask
        lj = mj & mask
        # rejection (probability < 2 n / 2**32): only if a low word is below its range
        if li < ni and li < (mask - ni + uint64(1)) % ni:
            continue
        if lj < nj and lj < (mask - nj + uint64(1)) % nj:
            continue
        i = int64(mi >> uint64(32))
        j = int64(mj >> uint64(32))
        if j >= i:
            j += int64(1)
        return i, j


@njit(cache=True)
def normal(s: np.ndarray) -> float:
    """Standard normal deviate (Box-Muller, one of the pair; 1 - U avoids log(0))."""
    u1 = 1.0 - uniform(s)
    u2 = uniform(s)
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def replica_states(seed: int, n_replicas: int) -> np.ndarray:
    """Generator states uint64[n_replicas, 4] spawned from numpy's SeedSequence(seed)."""
    children = np.random.SeedSequence(int(seed)).spawn(int(n_replicas))
    states = np.array([c.generate_state(4, dtype=np.uint64) for c in children], dtype=np.uint64)
    states[np.all(states == 0, axis=1), 0] = 1  # the all-zero state is a fixed point
    return states
