"""The estimator protocol: what every pose estimator of skidpad looks like.

An estimator is a small batched class (one row per robot). The runner calls ``reset`` once
with the start pose, then ``update`` every control tick with that tick's sensor readings.
"""

from __future__ import annotations

from typing import ClassVar, Protocol, runtime_checkable

import numpy as np

from planners.params import Param
from planners.readings import Readings


@runtime_checkable
class Estimator(Protocol):
    """Protocol of a pose estimator.

    Class attributes
    ----------------
    PARAMS : dict of str -> Param — the keys of its ``[estimator]`` table
    """

    PARAMS: ClassVar[dict[str, Param]]

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list[np.random.Generator] | None = None) -> None:
        """Start from ``pose0`` (N, 3) [m, m, rad], field frame, for ``n`` robots; ``rngs`` holds
        one generator per robot (robot k's own stream) for methods that draw."""

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Fold in one tick of readings; return the pose estimate (N, 3), field frame."""

    @property
    def covariance(self) -> np.ndarray | None:
        """Covariance of the last estimate (N, 3, 3), or ``None`` for methods without one."""
