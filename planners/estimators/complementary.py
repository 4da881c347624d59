"""``complementary``: gyro heading high-passed plus a reference heading low-passed.

``theta_k = a (theta_(k-1) + omega T) + (1 - a) theta_ref`` with ``a = exp(-2 pi fc T)``:
the gyro integral passes above ``fc`` and the reference heading (odometry every tick, or
fixes at the fix rate with ``T`` the fix period) below it. The innovation is wrapped, so
the blend is written ``theta = p + (1 - a) wrap(theta_ref - p)`` with ``p`` the gyro
prediction. Position: odometry increments laid along this heading.

Sources: the linear complementary filter, two filters that sum to one (``F_L(s) = C/(s + C)``
on the reference, ``F_H(s) = s/(s + C)`` on the integrated gyro, crossover ``C = 2 pi fc``),
Mahony, Hamel, Pflimlin, "Nonlinear complementary filters on the special orthogonal group",
IEEE Transactions on Automatic Control, 2008, §III (here on the heading angle alone, where the
group is the circle and the filter is linear in the wrapped error); discretised by ``z =
exp(sT)`` (Franklin, Powell, Workman, *Digital Control of Dynamic Systems*, 1998, §6.3.2),
which gives ``a`` above.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, make_odometry, need_fixes, need_imu, valid_fixes,
    split_params,
)
from planners.filters import lowpass_coefficient
from planners.params import Param
from planners.readings import Readings
from planners.se2 import between, compose, wrap


@ESTIMATORS.register("complementary")
class Complementary:
    """Complementary heading filter (gyro + odometry or fix heading), N robots.

    Parameters
    ----------
    source : odometry source (position, and the odometry reference heading)
    reference : {"odometry", "fixes"} — the low-passed heading
    cutoff : float — crossover frequency fc [Hz]
    **context : geometry, sensors (with ``imu``), field, dt from the runner
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "reference": Param(
            "choice", "odometry", "low-passed heading", choices=("odometry", "fixes")
        ),
        "cutoff": Param("frequency", 0.2, "crossover frequency", gt=0.0),
    }

    def __init__(self, **kwargs: Any) -> None:
        where = "estimator.complementary"
        context, p = split_params(where, self.PARAMS, kwargs)
        source, reference, cutoff = p["source"], p["reference"], p["cutoff"]
        need_imu(context, where=where)
        if reference == "fixes":
            need_fixes(context, where=where)
            period = 1.0 / float(context["sensors"].fixes.rate)
        else:
            period = float(context["dt"])
        self.reference = reference
        self.a = lowpass_coefficient(cutoff, period)
        self.dt = float(context["dt"])
        self._odo = make_odometry(context, source, where=where)
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame."""
        self._pose = as_start(pose0, n)
        self._odo.reset(self._pose)
        self._odo_prev = self._pose.copy()
        self._rate = np.zeros(n)

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        n = self._pose.shape[0]
        odo = self._odo.update(readings)
        step = between(self._odo_prev, odo)
        self._odo_prev = odo
        if readings.gyro_rate is not None and readings.imu_valid is not None:
            ok = np.asarray(readings.imu_valid, bool) & np.isfinite(readings.gyro_rate)
            self._rate = np.where(ok, readings.gyro_rate, self._rate)
        heading = wrap(self._pose[:, 2] + self._rate * self.dt)
        if self.reference == "odometry":
            heading = wrap(heading + (1.0 - self.a) * wrap(odo[:, 2] - heading))
        else:
            mask = valid_fixes(readings, n)
            if mask.any():
                ref = np.where(mask, np.nan_to_num(readings.fix[:, 2]), heading)
                heading = wrap(heading + np.where(mask, 1.0 - self.a, 0.0) * wrap(ref - heading))
        moved = compose(self._pose, step)
        moved[:, 2] = heading
        self._pose = moved
        return self._pose.copy()

    @property
    def covariance(self) -> None:
        """No covariance."""
        return None
