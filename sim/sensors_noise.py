"""Per-robot random draws for the sensors, in blocks.

Robot k draws every sensor random number from its own ``numpy.random.Generator``, so its
readings are bit-identical whether it runs alone or in a batch of any size. Calling N
generators every tick would cost more than the draws themselves, so each robot draws a
block of :data:`BLOCK` ticks at once; the block size is a constant (never derived from N),
so the stream each robot consumes does not depend on the batch.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

#: ticks drawn per refill (fixed: changing it changes every seeded result)
BLOCK = 128


class NoiseBuffer:
    """Blocks of standard normals and uniforms per robot, handed out one tick at a time.

    Parameters
    ----------
    rngs : sequence of numpy.random.Generator, length N — one stream per robot
    normals, uniforms : int — draws of each kind per robot per tick

    Each refill draws, for each robot in turn, ``standard_normal((BLOCK, normals))`` and
    then ``random((BLOCK, uniforms))``.
    """

    def __init__(self, rngs: Sequence[np.random.Generator], *, normals: int, uniforms: int) -> None:
        for k, g in enumerate(rngs):
            if not isinstance(g, np.random.Generator):
                raise TypeError(
                    f"sensors: rngs[{k}] must be a numpy.random.Generator, got {type(g).__name__}"
                )
        self._rngs = list(rngs)
        n = len(self._rngs)
        self.normals = int(normals)
        self.uniforms = int(uniforms)
        # (BLOCK, N, K): one tick's draws for all robots are one contiguous (N, K) slab
        self._z = np.empty((BLOCK, n, self.normals))
        self._u = np.empty((BLOCK, n, self.uniforms))

    def tick(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """The draws of tick ``k`` (ticks must be asked for in order): (N, normals), (N, uniforms)."""
        row = k % BLOCK
        if row == 0:
            self._refill()
        return self._z[row], self._u[row]

    def _refill(self) -> None:
        for i, g in enumerate(self._rngs):
            if self.normals:
                self._z[:, i, :] = g.standard_normal((BLOCK, self.normals))
            if self.uniforms:
                self._u[:, i, :] = g.random((BLOCK, self.uniforms))
