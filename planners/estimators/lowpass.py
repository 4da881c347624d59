"""``lowpass``: odometry plus a low-passed correction toward the fixes.

The correction ``c`` (field frame, [m, m, rad]) is the first-order low-pass
(:class:`planners.filters.LowPass`) of the fix error ``fix - odometry`` sampled at each fix,
with ``a = exp(-2 pi cutoff / fix_rate)``; the estimate is ``odometry + c``. Fix latency is
not modelled.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, make_odometry, need_fixes, valid_fixes, split_params,
)
from planners.filters import LowPass, lowpass_coefficient
from planners.params import Param
from planners.readings import Readings
from planners.se2 import wrap


@ESTIMATORS.register("lowpass")
class LowPassFixes:
    """Odometry corrected by low-passed fix errors, N robots.

    Parameters
    ----------
    source : odometry source
    cutoff : float — low-pass cutoff fc [Hz], applied at the fix rate
    **context : geometry, sensors (with ``fixes``), field, dt from the runner
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "cutoff": Param("frequency", 0.5, "cutoff of the fix-error low-pass", gt=0.0),
    }

    def __init__(self, **kwargs: Any) -> None:
        context, p = split_params("estimator.lowpass", self.PARAMS, kwargs)
        source, cutoff = p["source"], p["cutoff"]
        need_fixes(context, where="estimator.lowpass")
        self._odo = make_odometry(context, source, where="estimator.lowpass")
        rate = float(context["sensors"].fixes.rate)
        self._filter = LowPass(a=lowpass_coefficient(cutoff, 1.0 / rate))
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame, with no correction."""
        self._odo.reset(as_start(pose0, n))
        self._filter.reset(np.zeros((n, 3)))

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        odo = self._odo.update(readings)
        mask = valid_fixes(readings, odo.shape[0])
        if mask.any():
            err = np.where(mask[:, None], np.nan_to_num(readings.fix) - odo, 0.0)
            err[:, 2] = wrap(err[:, 2])
            self._filter.update(err, mask)
        out = odo + self._filter.y
        out[:, 2] = wrap(out[:, 2])
        return out

    @property
    def covariance(self) -> None:
        """No covariance."""
        return None
