"""``odometry``: dead reckoning from drive encoders or pods, optionally with IMU heading."""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, make_odometry, split_params,
)
from planners.params import Param
from planners.readings import Readings


@ESTIMATORS.register("odometry")
class DeadReckoning:
    """Pose by integrating count increments along exact arcs (:class:`planners.odometry.Odometry`).

    Parameters
    ----------
    source : {"encoders", "pods", "encoders+imu", "pods+imu"}
    **context : geometry, sensors, field, dt from the runner

    Raises
    ------
    ScenarioError
        When the sensors ``source`` needs are absent.
    """

    PARAMS: ClassVar[dict[str, Param]] = {"source": SOURCE_PARAM}

    def __init__(self, **kwargs: Any) -> None:
        context, p = split_params("estimator.odometry", self.PARAMS, kwargs)
        self._odo = make_odometry(context, p["source"], where="estimator.odometry")

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame."""
        self._odo.reset(as_start(pose0, n))

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        return self._odo.update(readings)

    @property
    def covariance(self) -> None:
        """No covariance."""
        return None
