"""Per-robot random draws for the sensors, in blocks.

Robot k draws every sensor random number from its own ``numpy.random.Generator``, so its
readings are bit-identical whether it runs alone or in a batch of any size. Calling N
generators at every sample would cost more than the draws themselves, so each sensor
share a :class:`NoiseBlock`: each robot draws :data:`BLOCK` ticks' worth for every sensor
at once (two generator calls per robot and refill), and the block is handed out one tick at
a time.

A block runs out every BLOCK control ticks, the same for every robot; the block size is a
constant, never derived from N. So each robot consumes its stream in the same order alone or
in any batch.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

#: samples drawn per refill (fixed: changing it changes every seeded result)
BLOCK = 128


def check_generators(rngs: Sequence[np.random.Generator]) -> list[np.random.Generator]:
    """The generators as a list; raises TypeError for anything that is not a Generator."""
    for k, g in enumerate(rngs):
        if not isinstance(g, np.random.Generator):
            raise TypeError(
                f"sensors: rngs[{k}] must be a numpy.random.Generator, got {type(g).__name__}"
            )
    return list(rngs)


class NoiseBlock:
    """Blocks of standard normals and uniforms per robot, shared by the sensors of a suite.

    Parameters
    ----------
    rngs : list of numpy.random.Generator, length N — one stream per robot
    layout : dict of str -> (int, int) — each sensor's normals and uniforms per sample

    The block holds one row per control tick: sensor ``s`` owns a fixed range of the row's
    columns and uses them on the ticks it samples (the draws of the other ticks are left
    unused). Each refill, every :data:`BLOCK` ticks, draws for each robot in turn
    ``standard_normal((BLOCK, normals))`` and then ``random((BLOCK, uniforms))``, the
    normals and uniforms of every sensor at once: two calls per robot and refill, whatever
    the sensors.
    """

    def __init__(self, rngs: list[np.random.Generator], layout: dict[str, tuple[int, int]]) -> None:
        self._rngs = rngs
        n = len(rngs)
        self._cols: dict[str, tuple[slice, slice]] = {}
        nz = nu = 0
        for name, (a, b) in layout.items():
            self._cols[name] = (slice(nz, nz + int(a)), slice(nu, nu + int(b)))
            nz += int(a)
            nu += int(b)
        self.normals, self.uniforms = nz, nu
        self._tick = -1
        # (BLOCK, N, K): one tick's draws for all robots are one contiguous (N, K) slab
        self._z = np.empty((BLOCK, n, nz))
        self._u = np.empty((BLOCK, n, nu))

    def advance(self) -> None:
        """Move on to the next control tick's row (refilling every BLOCK ticks)."""
        self._tick += 1
        if self._tick % BLOCK == 0:
            self._refill()

    def take(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """Sensor ``name``'s draws of this tick: normals (N, normals), uniforms (N, uniforms)."""
        row = self._tick % BLOCK
        z, u = self._cols[name]
        return self._z[row][:, z], self._u[row][:, u]

    def _refill(self) -> None:
        for i, g in enumerate(self._rngs):
            if self.normals:
                self._z[:, i, :] = g.standard_normal((BLOCK, self.normals))
            if self.uniforms:
                self._u[:, i, :] = g.random((BLOCK, self.uniforms))
