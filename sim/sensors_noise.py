"""Per-robot random draws for the sensors, keyed by tick and sensor.

Robot k draws every sensor random number from its own stream, so its readings are
bit-identical whether it runs alone or in a batch of any size. The stream is the
counter-based generator of :mod:`sim.keyed_draws`: at reset each robot takes one 64-bit
key from its ``numpy.random.Generator``, and the draw for (tick, sensor, index) is word
number ``tick * stride + offset[sensor] + index`` of that key. A sensor draws only on the
ticks it samples, one compiled call for all robots; which robots share the batch, and which
other sensors sampled, change nothing.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from sim.keyed_draws import DENSITY, EDGES, fill_normals, fill_uniforms, robot_keys


def check_generators(rngs: Sequence[np.random.Generator]) -> list[np.random.Generator]:
    """The generators as a list; raises TypeError for anything that is not a Generator."""
    for k, g in enumerate(rngs):
        if not isinstance(g, np.random.Generator):
            raise TypeError(
                f"sensors: rngs[{k}] must be a numpy.random.Generator, got {type(g).__name__}"
            )
    return list(rngs)


class SensorDraws:
    """The normals and uniforms each sensor of a suite draws per sample, for N robots.

    Parameters
    ----------
    rngs : list of numpy.random.Generator, length N — one stream per robot (one key each)
    layout : dict of str -> (int, int) — each sensor's normals and uniforms per sample

    Each tick owns ``stride`` words of every robot's stream (the sum over the layout);
    sensor ``s`` owns a fixed range of them and draws it when it samples.
    """

    def __init__(self, rngs: list[np.random.Generator], layout: dict[str, tuple[int, int]]) -> None:
        self.keys = robot_keys(rngs)
        n = len(rngs)
        self._offset: dict[str, tuple[int, int]] = {}
        self._z: dict[str, np.ndarray] = {}
        self._u: dict[str, np.ndarray] = {}
        words = 0
        for name, (a, b) in layout.items():
            self._offset[name] = (words, words + int(a))
            words += int(a) + int(b)
            # one row per draw, one column per robot; refilled in place at each sample
            self._z[name] = np.empty((int(a), n))
            self._u[name] = np.empty((int(b), n))
        self.stride = words

    def take(self, name: str, tick: int) -> tuple[np.ndarray, np.ndarray]:
        """Sensor ``name``'s draws of control tick ``tick``: normals (normals, N), uniforms
        (uniforms, N).

        The arrays are the sensor's own buffers, valid until its next :meth:`take`.
        """
        oz, ou = self._offset[name]
        base = tick * self.stride
        z, u = self._z[name], self._u[name]
        if z.shape[0]:
            fill_normals(self.keys, base + oz, z, EDGES, DENSITY)
        if u.shape[0]:
            fill_uniforms(self.keys, base + ou, u)
        return z, u
