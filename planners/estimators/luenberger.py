"""``luenberger``: odometry prediction corrected toward each fix with a fixed gain.

``x <- x * u`` (odometry increment), then at a fix ``x <- x + K (z - x)`` with
``K = diag(gain_xy, gain_xy, gain_heading)`` and the heading error wrapped (Luenberger,
*Observing the state of a linear system*, 1964: a fixed-gain observer; here on the pose).
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, make_odometry, need_fixes, valid_fixes, split_params,
)
from planners.params import Param
from planners.readings import Readings
from planners.se2 import between, compose, wrap


@ESTIMATORS.register("luenberger")
class Luenberger:
    """Fixed-gain observer on the pose, N robots.

    Parameters
    ----------
    source : odometry source
    gain_xy, gain_heading : float — correction gain per fix, in [0, 1]
    **context : geometry, sensors (with ``fixes``), field, dt from the runner
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "gain_xy": Param("dimensionless", 0.2, "position correction per fix", ge=0.0, le=1.0),
        "gain_heading": Param("dimensionless", 0.2, "heading correction per fix", ge=0.0, le=1.0),
    }

    def __init__(self, **kwargs: Any) -> None:
        context, p = split_params("estimator.luenberger", self.PARAMS, kwargs)
        source, gain_xy, gain_heading = p["source"], p["gain_xy"], p["gain_heading"]
        need_fixes(context, where="estimator.luenberger")
        self._odo = make_odometry(context, source, where="estimator.luenberger")
        self.gain = np.array([gain_xy, gain_xy, gain_heading], dtype=np.float64)
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame."""
        self._pose = as_start(pose0, n)
        self._odo.reset(self._pose)
        self._odo_prev = self._pose.copy()

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        odo = self._odo.update(readings)
        step = between(self._odo_prev, odo)
        self._odo_prev = odo
        pose = compose(self._pose, step)
        mask = valid_fixes(readings, pose.shape[0])
        if mask.any():
            err = np.nan_to_num(readings.fix[mask]) - pose[mask]
            err[:, 2] = wrap(err[:, 2])
            pose[mask] += self.gain * err
            pose[:, 2] = wrap(pose[:, 2])
        self._pose = pose
        return pose.copy()

    @property
    def covariance(self) -> None:
        """No covariance."""
        return None
