"""``truth``: perfect knowledge of the pose — the floor every other estimator is judged against."""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.params import Param
from planners.readings import Readings


@ESTIMATORS.register("truth")
class Truth:
    """Returns the true pose the runner passes in ``readings.truth`` (no error, no covariance)."""

    PARAMS: ClassVar[dict[str, Param]] = {}
    NEEDS_TRUTH: ClassVar[bool] = True

    def __init__(self, **context: Any) -> None:
        self._pose = np.zeros((0, 3))

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3)."""
        self._pose = np.array(pose0, dtype=np.float64).reshape(n, 3)

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """The true pose (N, 3), field frame."""
        if readings.truth is None:
            raise ValueError("truth estimator: readings.truth must be filled by the runner")
        self._pose = np.array(readings.truth, dtype=np.float64)
        return self._pose.copy()

    @property
    def covariance(self) -> None:
        """No covariance."""
        return None
