"""Per-robot random draws for the sensors, in blocks.

Robot k draws every sensor random number from its own ``numpy.random.Generator``, so its
readings are bit-identical whether it runs alone or in a batch of any size. Calling N
generators at every sample would cost more than the draws themselves, so each sensor
keeps a :class:`NoiseBlock`: each robot draws :data:`BLOCK` samples' worth at once, and the
block is handed out one sample at a time, only when that sensor samples (a 30 Hz fix
does not pay for draws at the 200 Hz control rate).

When a block runs out is decided by the sample schedule alone, which is the same for every
robot; the block size is a constant, never derived from N. So each robot consumes its
stream in the same order alone or in any batch.
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
    """Blocks of standard normals and uniforms per robot, for one sensor.

    Parameters
    ----------
    rngs : list of numpy.random.Generator, length N — one stream per robot (shared with the
        robot's other sensors)
    normals, uniforms : int — draws of each kind per robot per sample

    Each refill draws, for each robot in turn, ``standard_normal((BLOCK, normals))`` and
    then ``random((BLOCK, uniforms))``.
    """

    def __init__(self, rngs: list[np.random.Generator], *, normals: int, uniforms: int = 0) -> None:
        self._rngs = rngs
        n = len(rngs)
        self.normals = int(normals)
        self.uniforms = int(uniforms)
        self._used = 0
        # (BLOCK, N, K): one sample's draws for all robots are one contiguous (N, K) slab
        self._z = np.empty((BLOCK, n, self.normals))
        self._u = np.empty((BLOCK, n, self.uniforms))

    def take(self) -> tuple[np.ndarray, np.ndarray]:
        """The next sample's draws: normals (N, normals), uniforms (N, uniforms)."""
        row = self._used % BLOCK
        if row == 0:
            self._refill()
        self._used += 1
        return self._z[row], self._u[row]

    def _refill(self) -> None:
        for i, g in enumerate(self._rngs):
            if self.normals:
                self._z[:, i, :] = g.standard_normal((BLOCK, self.normals))
            if self.uniforms:
                self._u[:, i, :] = g.random((BLOCK, self.uniforms))
