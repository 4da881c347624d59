"""``kalman``: linear Kalman filter, two models: heading fusion, and constant velocity.

``model = "heading"`` (the default). State per robot ``x = [heading, gyro bias]``. Process (one control tick ``T``): the gyro
integrates, ``heading' = heading + (omega - bias) T``, ``bias' = bias`` with white process
noise ``Q = diag((gyro_sigma T)^2, bias_walk^2 T)``, i.e. ``F = [[1, -T], [0, 1]]``,
``B = [T, 0]``, ``u = omega`` (the last gyro sample holds between samples). Measurements
``z = H x + v`` with ``H = [1, 0]``: the fix heading (``sigma_heading`` of the fix sensor)
and/or the odometry heading (``odometry_sigma``). Innovations are wrapped to (-pi, pi].
Fixes are applied as if current (their latency is not modelled here; see ``ekf``).

``mode = "full"`` runs the time-varying filter; ``"steady"`` uses its steady-state gains.
The odometry heading comes every tick, fixes every ``M = round(1 / (fix_rate T))`` ticks,
so the steady state is periodic with period M (and a fix gain computed as if fixes came
every tick would be far too small). The gains are the periodic steady state of
:func:`planners.filters.periodic_gains` (one period lifted into a time-invariant system and
solved with the DARE, exact): fixes only, the DARE of the model over M ticks
(``F^M``, ``sum F^i Q F^i'``); odometry only, the one-tick DARE; both, one odometry gain per
tick since the last fix (a robot whose fix was dropped keeps the gain of the period's last
tick until the next fix) and the fix gain.

Position: each tick's odometry body increment is laid along the filtered heading,
``pose <- [x, y, heading_prev] * between(odo_prev, odo)``, then the heading is replaced by
the filter's.

``model = "constant-velocity"``: the classic tracking filter on the fixes alone, for a robot
whose fix sensor is all it has (:mod:`planners.estimators.kalman_cv`).

Sources: Simon, *Optimal State Estimation*, 2006, ch. 5 (the discrete Kalman filter) and
ch. 7 (steady state); Bar-Shalom, Li, Kirubarajan, *Estimation with Applications to Tracking
and Navigation*, 2001, §6.2 (the constant-velocity model).
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, fix_sigma, make_odometry, need_fixes, need_imu, valid_fixes,
    split_params,
)
from planners.estimators.kalman_cv import CV_PARAMS, ConstantVelocity
from planners.filters import LinearKalman, periodic_gains
from planners.params import Param
from planners.readings import Readings
from planners.se2 import between, compose, wrap


@ESTIMATORS.register("kalman")
class HeadingKalman:
    """Heading/bias Kalman filter fusing gyro, fixes and odometry heading, for N robots.

    Parameters
    ----------
    model : {"heading", "constant-velocity"}
    mode : {"full", "steady"}
    measure : {"fixes", "odometry", "both"} — which headings correct the gyro
    source : odometry source for position (and for the odometry heading)
    gyro_sigma : float — gyro rate noise per tick [rad/s]
    bias_walk : float — gyro bias random walk [rad/s/sqrt(s)]
    bias_sigma : float — initial bias uncertainty [rad/s]
    odometry_sigma : float — noise of the odometry heading as a measurement [rad]
    accel_noise, turn_accel_noise : float — white acceleration densities of the
        constant-velocity model [m/s^2/sqrt(Hz)], [rad/s^2/sqrt(Hz)]
    **context : geometry, sensors, field, dt from the runner

    Raises
    ------
    ScenarioError
        Without an IMU, without fixes when ``measure`` uses them, or without the odometry
        sensors of ``source``.
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "model": Param(
            "choice", "heading", "heading fusion (gyro + headings) or constant velocity (fixes)",
            choices=("heading", "constant-velocity"),
        ),
        "mode": Param(
            "choice", "full", "time-varying gain or steady-state DARE gain",
            choices=("full", "steady"),
        ),
        "measure": Param(
            "choice", "fixes", "headings that correct the gyro",
            choices=("fixes", "odometry", "both"),
        ),
        "source": SOURCE_PARAM,
        "gyro_sigma": Param("angular_speed", 0.02, "gyro rate noise per tick", gt=0.0),
        "bias_walk": Param("rate_random_walk", 1e-4, "gyro bias random walk", ge=0.0),
        "bias_sigma": Param("angular_speed", 0.01, "initial gyro bias uncertainty", ge=0.0),
        "odometry_sigma": Param(
            "angle", 0.05, "noise of odometry heading as a measurement", gt=0.0
        ),
        **CV_PARAMS,
    }

    def __init__(self, **kwargs: Any) -> None:
        where = "estimator.kalman"
        context, p = split_params(where, self.PARAMS, kwargs)
        mode, measure, source = p["mode"], p["measure"], p["source"]
        self.model = p["model"]
        self._cv: ConstantVelocity | None = None
        if self.model == "constant-velocity":
            self._cv = ConstantVelocity(context, p, where=where)
            return
        gyro_sigma, bias_walk, odometry_sigma = p["gyro_sigma"], p["bias_walk"], p["odometry_sigma"]
        bias_sigma = p["bias_sigma"]
        need_imu(context, where=where)
        if measure in ("fixes", "both"):
            need_fixes(context, where=where)
        self._context = context
        self.measure = measure
        self._odo = make_odometry(context, source, where=where)
        dt = float(context["dt"])
        self.dt = dt
        f = np.array([[1.0, -dt], [0.0, 1.0]])
        b = np.array([[dt], [0.0]])
        q = np.diag([(gyro_sigma * dt) ** 2, bias_walk**2 * dt])
        h = np.array([[1.0, 0.0]])
        self._r_odo = np.array([[odometry_sigma**2]])
        self._r_fix = None
        if measure != "odometry":
            self._r_fix = np.array([[fix_sigma(context, None)[2] ** 2]])
        self._gains: dict[str, np.ndarray | None] = {"odometry": None, "fixes": None}
        self.every = 1
        if measure != "odometry":
            self.every = max(1, round(1.0 / (float(context["sensors"].fixes.rate) * dt)))
        if mode == "steady":
            self._steady(f, q, h)
        self._kf = LinearKalman(f=f, b=b, q=q, h=h, r=self._r_odo)
        self._bias_sigma = float(bias_sigma)
        self.reset(np.zeros((0, 3)), 0)

    def _steady(self, f: np.ndarray, q: np.ndarray, h: np.ndarray) -> None:
        # periodic steady state: odometry every tick, fixes at tick 0 of every period of M
        # (zero fix noise would make the DARE singular; a tiny floor keeps it solvable)
        r_odo, r_fix = self._r_odo, None if self._r_fix is None else np.maximum(self._r_fix, 1e-12)
        m = self.every if r_fix is not None else 1
        odo = [(h, r_odo)] if self.measure in ("odometry", "both") else []
        first = odo + ([(h, r_fix)] if r_fix is not None else [])
        _, gains = periodic_gains(f, q, [first] + [list(odo) for _ in range(m - 1)])
        if odo:
            self._gains["odometry"] = np.array([g[0] for g in gains])  # (M, 2, 1) by phase
        if r_fix is not None:
            self._gains["fixes"] = gains[0][-1]

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame, with zero bias."""
        if self._cv is not None:
            self._cv.reset(pose0, n)
            return
        self._phase = np.zeros(n, dtype=np.int64)
        self._pose = as_start(pose0, n)
        self._odo.reset(self._pose)
        self._odo_prev = self._pose.copy()
        self._rate = np.zeros(n)
        p0 = np.tile(np.diag([0.0, self._bias_sigma**2]), (n, 1, 1))
        self._kf.reset(np.column_stack([self._pose[:, 2], np.zeros(n)]), p0)

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame."""
        if self._cv is not None:
            return self._cv.update(t, readings)
        n = self._pose.shape[0]
        odo = self._odo.update(readings)
        step = between(self._odo_prev, odo)
        self._odo_prev = odo
        if readings.gyro_rate is not None and readings.imu_valid is not None:
            ok = np.asarray(readings.imu_valid, bool) & np.isfinite(readings.gyro_rate)
            self._rate = np.where(ok, readings.gyro_rate, self._rate)
        kf = self._kf
        kf.predict(self._rate[:, None])
        mask = valid_fixes(readings, n) if self.measure != "odometry" else np.zeros(n, bool)
        # ticks since the last fix: the phase of the periodic steady gain
        self._phase = np.where(mask, 0, np.minimum(self._phase + 1, self.every - 1))
        if self.measure in ("odometry", "both"):
            innov = wrap(odo[:, 2] - kf.x[:, 0])[:, None]
            gain = self._gains["odometry"]
            kf.update(innov, np.ones(n, bool), r=self._r_odo, gain=None if gain is None else gain[self._phase])
        if self.measure in ("fixes", "both"):
            if mask.any():
                r = np.array([[fix_sigma(self._context, readings)[2] ** 2]])
                innov = np.zeros((n, 1))
                innov[mask, 0] = wrap(readings.fix[mask, 2] - kf.x[mask, 0])
                kf.update(innov, mask, r=r, gain=self._gains["fixes"])
        kf.x[:, 0] = wrap(kf.x[:, 0])
        moved = compose(self._pose, step)
        moved[:, 2] = kf.x[:, 0]
        self._pose = moved
        return self._pose.copy()

    @property
    def heading_variance(self) -> np.ndarray:
        """Variance of the heading estimate (N,) [rad^2]."""
        if self._cv is not None:
            return self._cv.covariance[:, 2, 2].copy()
        return self._kf.p[:, 0, 0].copy()

    @property
    def covariance(self) -> np.ndarray | None:
        """Heading model: None (the position is not part of the filter; see
        :attr:`heading_variance`). Constant velocity: (N, 3, 3) of x, y, heading."""
        return None if self._cv is None else self._cv.covariance
