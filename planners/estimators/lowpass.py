"""``lowpass``: the first-order low-pass ``y_k = a y_(k-1) + (1 - a) x_k`` applied to fixes.

``a`` is given directly or from a cutoff frequency, ``a = exp(-2 pi fc T)`` with ``T`` the
fix period (the RC pole mapped by ``z = exp(sT)``; Franklin, Powell, Workman, *Digital
Control of Dynamic Systems*, 1998, §6.3.2); exactly one of the two may be given, neither
means ``cutoff = 0.5 Hz``. It samples once per fix (:class:`planners.filters.LowPass`).

* ``smooth = "correction"`` (default): the signal is the fix error ``fix - odometry``
  (field frame, heading wrapped) and the estimate is ``odometry + y``: odometry carries the
  fast motion, the filtered correction removes its slow drift and most of the fix noise.
* ``smooth = "fixes"``: the signal is the fix itself and the estimate is ``y``, held
  between fixes (no odometry: a fix-only estimate; ``a = 0`` is the latest fix held).

The lag it adds: to a slowly changing signal the filter's output is its input of
``a / (1 - a)`` samples ago (the group delay of ``(1 - a) / (1 - a z^-1)`` at low frequency,
:func:`planners.filters.lowpass_lag`), ``1 / (2 pi fc) - T / 2`` for ``fc T << 1``. With
``"fixes"`` that is a lag of the estimate behind a moving robot (0.5 Hz with 10 Hz fixes:
0.27 s, 27 cm at 1 m/s) on top of the fix latency, which is not modelled; with ``"correction"`` only the
drift correction lags, by the same time. Fewer fixes (a lower cutoff) pass less fix noise.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.errors import ScenarioError
from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, make_odometry, need_fixes, valid_fixes, split_params,
)
from planners.filters import LowPass, lowpass_lag
from planners.params import Param
from planners.readings import Readings
from planners.se2 import wrap

#: cutoff when neither ``a`` nor ``cutoff`` is given [Hz]
DEFAULT_CUTOFF = 0.5


@ESTIMATORS.register("lowpass")
class LowPassFixes:
    """Fixes (or the fix error of odometry) through a first-order low-pass, N robots.

    Parameters
    ----------
    source : odometry source (``smooth = "correction"``)
    a : float or None — coefficient in [0, 1)
    cutoff : float or None — fc [Hz], applied at the fix rate
    smooth : {"correction", "fixes"} — what is low-passed
    **context : geometry, sensors (with ``fixes``), field, dt from the runner

    Raises
    ------
    ScenarioError
        Without fixes, or with both ``a`` and ``cutoff``.
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "a": Param("dimensionless", None, "low-pass coefficient (or give cutoff)", ge=0.0, lt=1.0),
        "cutoff": Param(
            "frequency", None, f"cutoff of the low-pass at the fix rate (default {DEFAULT_CUTOFF} Hz)",
            gt=0.0,
        ),
        "smooth": Param(
            "choice", "correction", "low-pass the fix error of odometry, or the fixes themselves",
            choices=("correction", "fixes"),
        ),
    }

    def __init__(self, **kwargs: Any) -> None:
        where = "estimator.lowpass"
        context, p = split_params(where, self.PARAMS, kwargs)
        need_fixes(context, where=where)
        if p["a"] is not None and p["cutoff"] is not None:
            raise ScenarioError(
                f"{where}: a and cutoff must not both be given, got a={p['a']!r}, cutoff={p['cutoff']!r}"
            )
        period = 1.0 / float(context["sensors"].fixes.rate)
        cutoff = DEFAULT_CUTOFF if p["a"] is None and p["cutoff"] is None else p["cutoff"]
        self._filter = LowPass(a=p["a"], cutoff=cutoff, dt=None if cutoff is None else period)
        self.a = self._filter.a
        self.lag = lowpass_lag(self.a, period)  # [s], at low frequency
        self.smooth = p["smooth"]
        self._odo = make_odometry(context, p["source"], where=where) if self.smooth == "correction" else None
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame, with no correction."""
        start = as_start(pose0, n)
        if self._odo is None:
            self._filter.reset(start)
        else:
            self._odo.reset(start)
            self._filter.reset(np.zeros((n, 3)))

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        y = self._filter.y
        if self._odo is None:
            mask = valid_fixes(readings, y.shape[0])
            if mask.any():
                # the heading is filtered through its wrapped difference from the output
                x = np.where(mask[:, None], np.nan_to_num(readings.fix), y)
                x[:, 2] = y[:, 2] + wrap(x[:, 2] - y[:, 2])
                self._filter.update(x, mask)
                self._filter.y[:, 2] = wrap(self._filter.y[:, 2])
            return self._filter.y.copy()
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
