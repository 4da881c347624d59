"""Random draws inside compiled kernels: a counter-based generator keyed per robot.

The particle filter needs thousands of draws per robot per tick, from robot k's own stream
(so run k is bit-identical alone or in any batch), without a Python loop over the robots.
A counter-based generator does this: each robot holds a 128-bit key drawn once from its
``numpy.random.Generator``, and the draw for (tick, particle, purpose) is a pure function of
the key and that counter, so nothing is consumed in an order that could depend on the batch.

The generator is Philox4x64-10 (Salmon, Moraes, Dror, Shaw, "Parallel random numbers: as
easy as 1, 2, 3", SC 2011), the bit generator behind ``numpy.random.Philox``: a block of four
64-bit words is ten rounds of ``(hi, lo) = M * c`` multiplications and key xors applied to
the counter, with the key bumped by Weyl constants between rounds. Uniforms take the top 53
bits (as numpy does); normals come in pairs by the Box-Muller transform (Box and Muller,
"A note on the generation of random normal deviates", 1958):
``z = sqrt(-2 ln u1) (cos 2 pi u2, sin 2 pi u2)``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

_M0 = np.uint64(0xD2E7470EE14C6C93)
_M1 = np.uint64(0xCA5A826395121157)
_W0 = np.uint64(0x9E3779B97F4A7C15)
_W1 = np.uint64(0xBB67AE8584CAA73B)
_LOW32 = np.uint64(0xFFFFFFFF)
_S32 = np.uint64(32)
_S11 = np.uint64(11)
_TO_UNIT = 1.0 / 9007199254740992.0  # 2^-53

#: counter word 2 of each kind of draw, so draws of different purposes never share a block
MOTION, RESAMPLE, RESET, START, INJECT = 1, 2, 3, 4, 5


@njit(cache=True, inline="always")
def _mulhilo(a, b):
    # 64 x 64 -> 128-bit product from four 32 x 32 products
    a0 = a & _LOW32
    a1 = a >> _S32
    b0 = b & _LOW32
    b1 = b >> _S32
    p00 = a0 * b0
    p01 = a0 * b1
    p10 = a1 * b0
    mid = (p00 >> _S32) + (p01 & _LOW32) + (p10 & _LOW32)
    hi = a1 * b1 + (p01 >> _S32) + (p10 >> _S32) + (mid >> _S32)
    return hi, a * b


@njit(cache=True, inline="always")
def philox_block(c0, c1, c2, c3, k0, k1):
    """Philox4x64-10 of the counter ``(c0, c1, c2, c3)`` under the key ``(k0, k1)``.

    All arguments and results are ``numpy.uint64``.
    """
    for r in range(10):
        if r > 0:
            k0 = k0 + _W0
            k1 = k1 + _W1
        hi0, lo0 = _mulhilo(_M0, c0)
        hi1, lo1 = _mulhilo(_M1, c2)
        c0, c1, c2, c3 = hi1 ^ c1 ^ k0, lo1, hi0 ^ c3 ^ k1, lo0
    return c0, c1, c2, c3


@njit(cache=True, inline="always")
def uniforms4(key, i, tick, index, purpose):
    """Four uniforms in [0, 1) of robot ``i`` (``key`` (N, 2) uint64) for one counter."""
    u0, u1, u2, u3 = philox_block(
        np.uint64(tick), np.uint64(index), np.uint64(purpose), np.uint64(0), key[i, 0], key[i, 1]
    )
    return (
        (u0 >> _S11) * _TO_UNIT, (u1 >> _S11) * _TO_UNIT,
        (u2 >> _S11) * _TO_UNIT, (u3 >> _S11) * _TO_UNIT,
    )


@njit(cache=True, inline="always")
def normals4(key, i, tick, index, purpose):
    """Four standard normals of robot ``i`` for one counter (Box-Muller on two pairs)."""
    u0, u1, u2, u3 = uniforms4(key, i, tick, index, purpose)
    r0 = np.sqrt(-2.0 * np.log(1.0 - u0))  # 1 - u in (0, 1]: no log(0)
    r1 = np.sqrt(-2.0 * np.log(1.0 - u2))
    a0 = 2.0 * np.pi * u1
    a1 = 2.0 * np.pi * u3
    return r0 * np.cos(a0), r0 * np.sin(a0), r1 * np.cos(a1), r1 * np.sin(a1)


def robot_keys(rngs: list[np.random.Generator], words: int = 2) -> np.ndarray:
    """One key of ``words`` 64-bit words per robot (128 bits by default), shape (N, words)
    uint64, drawn from each robot's own generator."""
    keys = np.zeros((len(rngs), words), dtype=np.uint64)
    for k, g in enumerate(rngs):
        keys[k] = g.integers(0, np.iinfo(np.uint64).max, size=words, dtype=np.uint64, endpoint=True)
    return keys


@njit(cache=True)
def _blocks(key, ticks, index, purpose, out):
    # test hook: raw words of robot 0 for counters (tick, index, purpose, 0)
    for j in range(ticks.shape[0]):
        out[j, 0], out[j, 1], out[j, 2], out[j, 3] = philox_block(
            np.uint64(ticks[j]), np.uint64(index), np.uint64(purpose), np.uint64(0), key[0, 0], key[0, 1]
        )


@njit(cache=True)
def _normals(key, count, purpose, out):
    # test hook: 4 * count normals of robot 0, counters (0, j, purpose, 0)
    for j in range(count):
        out[4 * j], out[4 * j + 1], out[4 * j + 2], out[4 * j + 3] = normals4(key, 0, 0, j, purpose)


def raw_words(key: np.ndarray, ticks: np.ndarray, index: int, purpose: int) -> np.ndarray:
    """Raw 64-bit words (T, 4) of the counters ``(tick, index, purpose, 0)`` under ``key`` (2,)."""
    out = np.zeros((len(ticks), 4), dtype=np.uint64)
    _blocks(np.asarray(key, dtype=np.uint64).reshape(1, 2), np.asarray(ticks, dtype=np.int64), index, purpose, out)
    return out


def standard_normals(key: np.ndarray, count: int, purpose: int = MOTION) -> np.ndarray:
    """``4 * count`` standard normals under ``key`` (2,) uint64 (counters (0, j, purpose, 0))."""
    out = np.zeros(4 * count)
    _normals(np.asarray(key, dtype=np.uint64).reshape(1, 2), count, purpose, out)
    return out
