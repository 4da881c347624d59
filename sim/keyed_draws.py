"""Sensor noise inside compiled kernels: SplitMix64 words keyed per robot, ziggurat normals.

Each robot holds one 64-bit key, drawn once from its own ``numpy.random.Generator``. Its
word number ``c`` is the SplitMix64 output for the state ``key + (c + 1) * gamma``
(Steele, Lea, Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014; the
generator behind Java's ``SplittableRandom``): a pure function of the key and the counter,
so a robot's draws do not depend on which other robots share the batch or on the order in
which they are drawn, and a kernel draws them for every robot without a Python loop.

Standard normals come from one word each by the ziggurat method of Marsaglia and Tsang,
"The ziggurat method for generating random variables", J. Stat. Software 5(8), 2000, with
256 layers (``r = 3.6541528853610088``, ``v = 4.92867323399e-3``, their table 1). In 98.8 %
of draws the word's low 8 bits pick a layer, bit 8 the sign and its top 52 bits the
position, and the draw is accepted at once; the rest (the wedges and the tail beyond ``r``,
Marsaglia's 1964 tail method) take further words from a SplitMix64 chain seeded by the
rejected word, so they stay a function of the robot's key and the counter.

The batch fill runs in passes: the words, then the accept test for every draw (both
branch-light loops the compiler vectorises), then the few rejected draws.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numba import njit

from planners.estimators import draws

GAMMA = np.uint64(0x9E3779B97F4A7C15)  # SplitMix64 increment (2^64 / golden ratio, odd)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_S8, _S11, _S12 = np.uint64(8), np.uint64(11), np.uint64(12)
_S27, _S30, _S31 = np.uint64(27), np.uint64(30), np.uint64(31)
_BYTE, _ONE = np.uint64(255), np.uint64(1)
_TO_53 = 1.0 / 9007199254740992.0  # 2^-53
_TO_52 = 1.0 / 4503599627370496.0  # 2^-52

#: ziggurat constants for 256 layers (Marsaglia & Tsang 2000, table 1)
ZIGGURAT_R = 3.6541528853610088
ZIGGURAT_V = 4.92867323399e-3


def ziggurat_edges() -> np.ndarray:
    """Layer edges ``x[0..256]`` of the 256-layer normal ziggurat.

    ``x[1] = r`` and ``x[i+1] = f^-1(v / x[i] + f(x[i]))`` with ``f(x) = exp(-x^2 / 2)``, so
    every layer has area ``v``; ``x[0] = v / f(r)`` is the width of the base layer's
    rectangle (the base layer is that rectangle plus the tail) and ``x[256] = 0``.
    """
    f = lambda t: math.exp(-0.5 * t * t)  # noqa: E731 -- the unnormalised density
    x = np.zeros(257)
    x[0] = ZIGGURAT_V / f(ZIGGURAT_R)
    x[1] = ZIGGURAT_R
    for i in range(1, 255):
        x[i + 1] = math.sqrt(-2.0 * math.log(ZIGGURAT_V / x[i] + f(x[i])))
    return x


#: the layer edges and the unnormalised density at each (read-only, passed to the kernels)
EDGES = ziggurat_edges()
DENSITY = np.exp(-0.5 * EDGES * EDGES)
EDGES.setflags(write=False)
DENSITY.setflags(write=False)


@njit(cache=True, inline="always")
def splitmix(state):
    """The SplitMix64 output function of one 64-bit state (``numpy.uint64``)."""
    z = (state ^ (state >> _S30)) * _M1
    z = (z ^ (z >> _S27)) * _M2
    return z ^ (z >> _S31)


@njit(cache=True, inline="always")
def word(key, counter):
    """Word number ``counter`` (int >= 0) of the stream keyed by ``key`` (``numpy.uint64``)."""
    return splitmix(key + np.uint64(counter + 1) * GAMMA)


@njit(cache=True, inline="always")
def unit(w):
    """A uniform in [0, 1) from the top 53 bits of a word."""
    return np.float64(w >> _S11) * _TO_53


@njit(cache=True, inline="always")
def _fast_normal(w, x):
    # the ziggurat's quick accept; NaN when the word falls in a wedge or the tail
    i = np.int64(w & _BYTE)
    v = np.float64(w >> _S12) * _TO_52 * x[i]
    sign = 1.0 - 2.0 * np.float64((w >> _S8) & _ONE)
    return sign * v if v < x[i + 1] else np.nan


@njit(cache=True)
def slow_normal(w, x, f):
    """The ziggurat's full draw from word ``w`` (wedges and tail; later words by SplitMix64)."""
    z = w
    while True:
        i = np.int64(z & _BYTE)
        sign = 1.0 - 2.0 * np.float64((z >> _S8) & _ONE)
        v = np.float64(z >> _S12) * _TO_52 * x[i]
        if v < x[i + 1]:
            return sign * v
        if i == 0:  # the tail beyond r (Marsaglia 1964)
            while True:
                z = splitmix(z + GAMMA)
                a = -math.log(1.0 - unit(z)) / x[1]
                z = splitmix(z + GAMMA)
                b = -math.log(1.0 - unit(z))
                if b + b > a * a:
                    return sign * (x[1] + a)
        z = splitmix(z + GAMMA)  # a wedge: accept under the density
        if f[i] + unit(z) * (f[i + 1] - f[i]) < math.exp(-0.5 * v * v):
            return sign * v
        z = splitmix(z + GAMMA)


@njit(cache=True)
def fill_normals(keys, counter0, out, x, f):
    """``out[j, i]`` = normal number ``counter0 + j`` of robot ``i``'s stream (one row per
    draw, one column per robot, so the quick pass runs along contiguous rows)."""
    k, n = out.shape
    words = np.empty(n, dtype=np.uint64)
    for j in range(k):
        # two passes per row: the words (integer work), then the quick test (table lookups);
        # each simple enough to vectorise
        step = np.uint64(counter0 + j + 1) * GAMMA
        for i in range(n):
            words[i] = splitmix(keys[i] + step)
        for i in range(n):
            out[j, i] = _fast_normal(words[i], x)
    for j in range(k):
        for i in range(n):
            if out[j, i] != out[j, i]:  # rejected by the quick test
                out[j, i] = slow_normal(word(keys[i], counter0 + j), x, f)


@njit(cache=True)
def fill_uniforms(keys, counter0, out):
    """``out[j, i]`` = uniform number ``counter0 + j`` of robot ``i``'s stream, in [0, 1)."""
    k, n = out.shape
    for j in range(k):
        step = np.uint64(counter0 + j + 1) * GAMMA
        for i in range(n):
            out[j, i] = unit(splitmix(keys[i] + step))


def robot_keys(rngs: Sequence[np.random.Generator]) -> np.ndarray:
    """One 64-bit key per robot, shape (N,) uint64, drawn from each robot's own generator."""
    return np.ascontiguousarray(draws.robot_keys(list(rngs), words=1)[:, 0])


def normals(keys: np.ndarray, counter0: int, count: int) -> np.ndarray:
    """Standard normals, shape (count, N): row ``j`` holds each robot's number ``counter0 + j``."""
    out = np.empty((count, len(keys)))
    fill_normals(np.ascontiguousarray(keys, dtype=np.uint64), counter0, out, EDGES, DENSITY)
    return out


def uniforms(keys: np.ndarray, counter0: int, count: int) -> np.ndarray:
    """Uniforms in [0, 1), shape (count, N): row ``j`` holds each robot's number ``counter0 + j``."""
    out = np.empty((count, len(keys)))
    fill_uniforms(np.ascontiguousarray(keys, dtype=np.uint64), counter0, out)
    return out
