"""The ``kalman`` estimator's constant-velocity model: a tracking filter on the fixes alone.

State per robot ``x = [x, vx, y, vy, h, vh]`` (field frame; position [m], velocity [m/s],
heading [rad], turn rate [rad/s]). Each axis is the continuous white-noise acceleration
model sampled at the tick ``T`` (Bar-Shalom, Li, Kirubarajan, *Estimation with Applications
to Tracking and Navigation*, 2001, §6.2.2):

    F = [[1, T], [0, 1]],   Q = q [[T^3 / 3, T^2 / 2], [T^2 / 2, T]]

with ``q = accel_noise^2`` for x and y and ``turn_accel_noise^2`` for the heading. A fix
measures ``[x, y, h]`` (``H`` picks them; heading innovation wrapped) with the fix sensor's
noise. Fixes are taken as current (their latency is not modelled; see ``ekf``). With
``mode = "steady"`` the gain is the periodic steady state for fixes every
``M = round(1 / (fix_rate T))`` ticks: the DARE of the model lifted over M ticks
(:func:`planners.filters.periodic_gains`), applied at each fix.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.linalg

from planners.errors import ScenarioError
from planners.estimators.common import as_start, fix_sigma, need_fixes, valid_fixes
from planners.filters import LinearKalman, periodic_gains
from planners.params import Param
from planners.readings import Readings
from planners.se2 import wrap

CV_PARAMS: dict[str, Param] = {
    "accel_noise": Param(
        "dimensionless", 0.5,
        "constant-velocity model: white acceleration density [m/s^2/sqrt(Hz)]", gt=0.0,
    ),
    "turn_accel_noise": Param(
        "dimensionless", 1.0,
        "constant-velocity model: white turn acceleration density [rad/s^2/sqrt(Hz)]", gt=0.0,
    ),
}

#: rows of ``x`` that a fix measures: x, y, heading
MEASURED = np.array([0, 2, 4])


def cv_model(dt: float, accel_noise: float, turn_accel_noise: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``F`` (6, 6), ``Q`` (6, 6) and ``H`` (3, 6) of the constant-velocity model (tick ``dt``)."""
    f1 = np.array([[1.0, dt], [0.0, 1.0]])
    q1 = np.array([[dt**3 / 3.0, dt**2 / 2.0], [dt**2 / 2.0, dt]])
    f = scipy.linalg.block_diag(f1, f1, f1)
    q = scipy.linalg.block_diag(accel_noise**2 * q1, accel_noise**2 * q1, turn_accel_noise**2 * q1)
    h = np.zeros((3, 6))
    h[np.arange(3), MEASURED] = 1.0
    return f, q, h


class ConstantVelocity:
    """Constant-velocity Kalman filter on fixes, N robots (built by the ``kalman`` estimator).

    Parameters
    ----------
    context : dict — geometry, sensors (with ``fixes``), field, dt from the runner
    p : dict — the ``kalman`` estimator's resolved parameters
    where : str — start of error messages

    Raises
    ------
    ScenarioError
        Without fixes, or with ``measure`` other than ``"fixes"``.
    """

    def __init__(self, context: dict[str, Any], p: dict[str, Any], *, where: str) -> None:
        need_fixes(context, where=where)
        if p["measure"] != "fixes":
            raise ScenarioError(
                f"{where}: measure must be 'fixes' with model 'constant-velocity', got {p['measure']!r}"
            )
        self._context = context
        dt = float(context["dt"])
        f, q, h = cv_model(dt, float(p["accel_noise"]), float(p["turn_accel_noise"]))
        r = np.diag(np.maximum(fix_sigma(context, None) ** 2, 1e-12))
        self.every = max(1, round(1.0 / (float(context["sensors"].fixes.rate) * dt)))
        gain = None
        if p["mode"] == "steady":
            _, gains = periodic_gains(f, q, [[(h, r)]] + [[] for _ in range(self.every - 1)])
            gain = gains[0][0]
        self.gain = gain
        self._kf = LinearKalman(f=f, b=np.zeros((6, 1)), q=q, h=h, r=r, gain=gain)
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int) -> None:
        """Start at ``pose0`` (N, 3) at rest, with a tiny covariance."""
        start = as_start(pose0, n)
        x0 = np.zeros((n, 6))
        x0[:, MEASURED] = start
        self._kf.reset(x0, np.tile(1e-8 * np.eye(6), (n, 1, 1)))
        self._u = np.zeros((n, 1))

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        kf = self._kf
        n = kf.x.shape[0]
        kf.predict(self._u)
        mask = valid_fixes(readings, n)
        if mask.any():
            r = np.diag(np.maximum(fix_sigma(self._context, readings) ** 2, 1e-12))
            innov = np.where(mask[:, None], np.nan_to_num(readings.fix) - kf.x[:, MEASURED], 0.0)
            innov[:, 2] = wrap(innov[:, 2])
            kf.update(innov, mask, r=r)
        kf.x[:, 4] = wrap(kf.x[:, 4])
        return kf.x[:, MEASURED].copy()

    @property
    def state(self) -> np.ndarray:
        """The filter state (N, 6): x, vx, y, vy, heading, turn rate (a copy)."""
        return self._kf.x.copy()

    @property
    def covariance(self) -> np.ndarray:
        """Covariance of x, y, heading (N, 3, 3) [m^2, m^2, rad^2]."""
        return self._kf.p[:, MEASURED][:, :, MEASURED].copy()
