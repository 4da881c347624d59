"""``ekf``: planar pose extended Kalman filter with latency-aware fixes and innovation gating.

Process: each tick's odometry increment ``u = [ux, uy, utheta]`` (body frame; the exact arc
``exp`` of the count twist, so the IMU enters through the ``"+imu"`` odometry sources)
moves the pose, ``x' = x * u``. Linearised (Thrun, Burgard, Fox, *Probabilistic Robotics*,
2005, §5.4 / Table 7.1 form, on SE(2) composition):

    F_x = [[1, 0, -s ux - c uy], [0, 1, c ux - s uy], [0, 0, 1]],  F_u = R(theta) (+) 1
    P'  = F_x P F_x' + F_u Q_u F_u'

with body-frame increment noise ``Q_u = diag(vd + f_xy^2, vl + f_xy^2, vt + f_h^2)``: variances
that grow in proportion to the distance ``d = |(ux, uy)|`` and turn, ``vd = distance_noise^2 d``
along the body x axis, ``vl = lateral_noise^2 d`` across it (a skid or differential chassis
barely slides sideways, a mecanum one does), and ``vt = turn_noise^2 |utheta| + drift_noise^2 d``
(so the spread after a drive does not depend on the tick rate; ``f`` are per-tick floors).
With an ``"+imu"`` source the heading increment is the integrated gyro, not the wheels, so
wheel drift does not enter it: ``vt = N^2 T + turn_noise^2 |utheta|`` with the gyro's white
rate noise density ``N`` (``sensors.imu.rate_noise``; angle random walk, IEEE Std 952-1997)
over the tick ``T``, and ``turn_noise`` standing for the gyro's scale uncertainty. The bias
walk is not modelled (its heading error grows as ``t^(3/2)`` and the fixes bound it).

Fixes ``z = x + v`` (``H = I``) describe the pose at ``fix_time``. With ``latency = "replay"``
the filter keeps the last ``history`` seconds of states and increments, applies the fix to
the state of its time and re-applies the later increments; ``"ignore"`` applies it to the
current state as if it were current. A fix whose squared Mahalanobis distance
``nu' S^-1 nu`` exceeds ``gate`` (chi-square, 3 degrees of freedom) is rejected; after
``reacquire`` rejections in a row the filter restarts from the next fix (pose = fix,
covariance = fix covariance), so a filter that has drifted far (wheel slip) cannot lock
itself out of every later fix.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, fix_sigma, make_odometry, valid_fixes, split_params,
)
from planners.params import Param
from planners.readings import Readings
from planners.se2 import between, compose, wrap


def predict(
    pose: np.ndarray, cov: np.ndarray, step: np.ndarray, q_body: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """One EKF prediction by odometry increments.

    Parameters
    ----------
    pose : ndarray, shape (M, 3) — field frame; cov : ndarray, shape (M, 3, 3)
    step : ndarray, shape (M, 3) — increment, body frame [m, m, rad]
    q_body : ndarray, shape (M, 3) — variances of the increment, body frame

    Returns
    -------
    pose, cov : the predicted pose (M, 3) and covariance (M, 3, 3)
    """
    c, s = np.cos(pose[:, 2]), np.sin(pose[:, 2])
    m = pose.shape[0]
    fx = np.tile(np.eye(3), (m, 1, 1))
    fx[:, 0, 2] = -s * step[:, 0] - c * step[:, 1]
    fx[:, 1, 2] = c * step[:, 0] - s * step[:, 1]
    fu = np.zeros((m, 3, 3))
    fu[:, 0, 0], fu[:, 0, 1], fu[:, 1, 0], fu[:, 1, 1], fu[:, 2, 2] = c, -s, s, c, 1.0
    qf = fu @ (q_body[:, :, None] * np.swapaxes(fu, 1, 2))
    return compose(pose, step), fx @ cov @ np.swapaxes(fx, 1, 2) + qf


def correct(
    pose: np.ndarray, cov: np.ndarray, fix: np.ndarray, r: np.ndarray, gate: float
) -> tuple[np.ndarray, np.ndarray, bool]:
    """One gated fix update of one robot: pose (3,), cov (3, 3), fix (3,), r (3, 3)."""
    nu = fix - pose
    nu[2] = wrap(nu[2])
    s = cov + r
    d2 = float(nu @ np.linalg.solve(s, nu))
    if not d2 <= gate:
        return pose, cov, False
    k = np.linalg.solve(s.T, cov.T).T
    a = np.eye(3) - k
    out = pose + k @ nu
    out[2] = wrap(out[2])
    # Joseph form, symmetric and positive for any gain
    return out, a @ cov @ a.T + k @ r @ k.T, True


@ESTIMATORS.register("ekf")
class PoseEKF:
    """Pose EKF with odometry process, latency-aware fixes and chi-square gating, N robots.

    Parameters
    ----------
    source : odometry source of the increments ("+imu" folds the gyro into the heading)
    distance_noise : float — position std after 1 m driven [m/sqrt(m)]
    turn_noise : float — heading std after 1 rad turned [rad/sqrt(rad)]
    drift_noise : float — heading std after 1 m driven [rad/sqrt(m)] (wheel heading only)
    lateral_noise : float or None — sideways position std after 1 m [m/sqrt(m)]
    floor_xy, floor_heading : float — per-tick noise floor [m], [rad]
    gate : float — chi-square threshold of a fix (3 dof; 11.34 is the 99 % quantile)
    latency : {"replay", "ignore"} — re-apply increments after a late fix, or not
    history : float — how far back a late fix may reach [s]
    reacquire : int — rejected fixes in a row before restarting from the next fix
    **context : geometry, sensors, field, dt from the runner
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "distance_noise": Param(
            "dimensionless", 0.02, "position std after 1 m driven [m/sqrt(m)]", ge=0.0
        ),
        "turn_noise": Param(
            "dimensionless", 0.05, "heading std after 1 rad turned [rad/sqrt(rad)]", ge=0.0
        ),
        "drift_noise": Param(
            "dimensionless", 0.02, "heading std after 1 m driven [rad/sqrt(m)]", ge=0.0
        ),
        "lateral_noise": Param(
            "dimensionless", None,
            "sideways position std after 1 m driven [m/sqrt(m)] (default: distance_noise)", ge=0.0,
        ),
        "floor_xy": Param("length", 1e-4, "per-tick position noise floor", ge=0.0),
        "floor_heading": Param("angle", 1e-4, "per-tick heading noise floor", ge=0.0),
        "gate": Param("dimensionless", 11.34, "chi-square gate of a fix (3 dof)", gt=0.0),
        "latency": Param(
            "choice", "replay", "late fixes: replay later increments or ignore age",
            choices=("replay", "ignore"),
        ),
        "history": Param("time", 0.5, "how far back a late fix may reach", ge=0.0),
        "reacquire": Param(
            "count", 5, "rejected fixes in a row before restarting from the next", ge=1
        ),
    }

    def __init__(self, **kwargs: Any) -> None:
        context, p = split_params("estimator.ekf", self.PARAMS, kwargs)
        self._context = context
        self._odo = make_odometry(context, p["source"], where="estimator.ekf")
        self.noise = (float(p["distance_noise"]), float(p["turn_noise"]), float(p["drift_noise"]))
        lateral = p["lateral_noise"]
        self.lateral = self.noise[0] if lateral is None else float(lateral)
        imu = getattr(context.get("sensors"), "imu", None)
        # white gyro noise integrated over one tick: N^2 T (IEEE Std 952-1997 angle random walk)
        self.gyro_var = (
            float(getattr(imu, "rate_noise", 0.0)) ** 2 * float(context["dt"])
            if p["source"].endswith("+imu") else None
        )
        self.floor = (float(p["floor_xy"]) ** 2, float(p["floor_heading"]) ** 2)
        self.gate = float(p["gate"])
        self.latency = p["latency"]
        self.reacquire = int(p["reacquire"])
        history = float(p["history"])
        dt = float(context["dt"])
        self._dt = dt
        self._depth = max(1, int(math.ceil(history / dt)) + 1)
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame, with a tiny covariance."""
        self._pose = as_start(pose0, n)
        self._cov = np.tile(np.diag([1e-8, 1e-8, 1e-8]), (n, 1, 1))
        self._odo.reset(self._pose)
        self._odo_prev = self._pose.copy()
        h = self._depth
        self._h_time = np.full(h, -np.inf)
        self._h_pose = np.zeros((n, h, 3))
        self._h_cov = np.zeros((n, h, 3, 3))
        self._h_step = np.zeros((n, h, 3))
        self._h_q = np.zeros((n, h, 3))
        self._tick = 0
        self.rejected = np.zeros(n, dtype=np.int64)
        self._streak = np.zeros(n, dtype=np.int64)

    def _q_body(self, step: np.ndarray) -> np.ndarray:
        kd, kt, kh = self.noise
        d = np.hypot(step[:, 0], step[:, 1])
        sd2 = kd * kd * d + self.floor[0]
        sl2 = self.lateral * self.lateral * d + self.floor[0]
        if self.gyro_var is None:
            st2 = kt * kt * np.abs(step[:, 2]) + kh * kh * d + self.floor[1]
        else:
            st2 = self.gyro_var + kt * kt * np.abs(step[:, 2]) + self.floor[1]
        return np.column_stack([sd2, sl2, st2])

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame; :attr:`covariance` follows."""
        n = self._pose.shape[0]
        odo = self._odo.update(readings)
        step = between(self._odo_prev, odo)
        self._odo_prev = odo
        q = self._q_body(step)
        self._pose, self._cov = predict(self._pose, self._cov, step, q)
        slot = self._tick % self._depth
        self._tick += 1
        self._h_time[slot] = t
        self._h_pose[:, slot], self._h_cov[:, slot] = self._pose, self._cov
        self._h_step[:, slot], self._h_q[:, slot] = step, q
        mask = valid_fixes(readings, n)
        if mask.any():
            r = np.diag(fix_sigma(self._context, readings) ** 2)
            stamp = readings.fix_time if readings.fix_time is not None else np.full(n, t)
            for i in np.flatnonzero(mask):
                self._fold_fix(i, np.asarray(readings.fix[i], float), float(stamp[i]), r, t)
        return self._pose.copy()

    def _fold_fix(self, i: int, fix: np.ndarray, stamp: float, r: np.ndarray, t: float) -> None:
        # ring slots oldest -> newest
        order = (np.arange(self._depth) + self._tick) % self._depth
        order = order[np.isfinite(self._h_time[order])]
        if self.latency == "ignore" or not np.isfinite(stamp) or stamp >= t:
            pos = len(order) - 1
        else:
            times = self._h_time[order]
            pos = int(np.argmin(np.abs(times - stamp)))
            if stamp < times[0] - 0.5 * self._dt:
                self.rejected[i] += 1  # older than the history: nothing to attach it to
                return
        j = order[pos]
        if self._streak[i] >= self.reacquire:
            pose, cov, ok = fix.copy(), r.copy(), True
            pose[2] = wrap(pose[2])
        else:
            pose, cov, ok = correct(self._h_pose[i, j].copy(), self._h_cov[i, j], fix, r, self.gate)
        if not ok:
            self.rejected[i] += 1
            self._streak[i] += 1
            return
        self._streak[i] = 0
        self._h_pose[i, j], self._h_cov[i, j] = pose, cov
        p, c = pose[None], cov[None]
        for k in order[pos + 1:]:
            p, c = predict(p, c, self._h_step[i, k][None], self._h_q[i, k][None])
            self._h_pose[i, k], self._h_cov[i, k] = p[0], c[0]
        self._pose[i], self._cov[i] = p[0], c[0]

    @property
    def covariance(self) -> np.ndarray:
        """Covariance of the estimate (N, 3, 3) [m^2, m^2, rad^2], field frame."""
        return self._cov.copy()
