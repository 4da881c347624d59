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

Range sensors (``ranges = true``): each beam is a scalar measurement of the distance to the
first wall along its ray, ``z = t(x) + v``, ``v ~ N(0, range_sigma^2)``. The expected range
``t`` is cast from the estimate against the field's wall segments (:mod:`planners.raycast`)
and ``H = dt/dx`` is its analytic gradient against the hit wall's line (checked against
central differences in the tests). Beams are applied one after another (scalar updates, no
matrix inverse), gated by ``nu^2 / s`` against ``range_gate`` (chi-square, 1 dof); a beam
reading ``inf`` (no wall within its range) is not used. Ranges are current; they are kept in
the history, so a late fix re-applies them after each re-applied increment.

Every step is one compiled call per tick over the batch (:mod:`planners.estimators.ekf_kernels`).
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.beams import RANGE_SIGMA_PARAM, Beams, beam_readings, make_beams
from planners.estimators.common import (
    MOTION_PARAMS, SOURCE_PARAM, FixFeed, as_start, make_odometry, motion_noise, split_params,
)
from planners.estimators.ekf_kernels import ekf_tick
from planners.params import Param
from planners.readings import Readings

@ESTIMATORS.register("ekf")
class PoseEKF:
    """Pose EKF with odometry process, latency-aware fixes, range beams and chi-square gating.

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
    ranges : bool — use the range sensors against the field's walls
    range_sigma : float or None — range noise assumed [m]
    range_gate : float — chi-square threshold of a beam (1 dof; 6.63 is the 99 % quantile)
    **context : geometry, sensors, field, dt from the runner

    Attributes
    ----------
    rejected : ndarray (N,) int — fixes rejected by the gate (or too old)
    range_rejected : ndarray (N,) int — beams rejected by the gate
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        **MOTION_PARAMS,
        "gate": Param("dimensionless", 11.34, "chi-square gate of a fix (3 dof)", gt=0.0),
        "latency": Param(
            "choice", "replay", "late fixes: replay later increments or ignore age",
            choices=("replay", "ignore"),
        ),
        "history": Param(
            "time", None,
            "how far back a late fix may reach (default: the fix sensor's latency + 2 ticks)",
            ge=0.0,
        ),
        "reacquire": Param(
            "count", 5, "rejected fixes in a row before restarting from the next", ge=1
        ),
        "ranges": Param("bool", False, "use the range sensors against the field's walls"),
        "range_sigma": RANGE_SIGMA_PARAM,
        "range_gate": Param("dimensionless", 6.63, "chi-square gate of a range beam (1 dof)", gt=0.0),
    }

    def __init__(self, **kwargs: Any) -> None:
        where = "estimator.ekf"
        context, p = split_params(where, self.PARAMS, kwargs)
        self._odo = make_odometry(context, p["source"], where=where, positions=False)
        self._noise = motion_noise(context, p)
        self.gate = float(p["gate"])
        self.latency = p["latency"]
        self.reacquire = int(p["reacquire"])
        self._dt = float(context["dt"])
        history = p["history"]
        if history is None:
            fixes = getattr(context.get("sensors"), "fixes", None)
            # (a fix sensor that states no latency is given 0.5 s)
            history = 0.0 if fixes is None else float(getattr(fixes, "latency", 0.5)) + 2.0 * self._dt
        self._depth = max(1, int(math.ceil(float(history) / self._dt - 1e-9)) + 1)
        self.beams: Beams | None = (
            make_beams(context, p["range_sigma"], where=where, required=True) if p["ranges"] else None
        )
        self.range_gate = float(p["range_gate"])
        self._fixes = FixFeed(context)
        self.reset(np.zeros((0, 3)), 0)

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start at ``pose0`` (N, 3) [m, m, rad], field frame, with a tiny covariance."""
        self._pose = np.ascontiguousarray(as_start(pose0, n))
        self._cov = np.tile(np.diag([1e-8, 1e-8, 1e-8]), (n, 1, 1))
        self._cs = np.column_stack([np.cos(self._pose[:, 2]), np.sin(self._pose[:, 2])])
        self._odo.reset(self._pose)
        h = self._depth
        r = 0 if self.beams is None else self.beams.count
        self._h_time = np.full(h, -np.inf)
        # one tick's rows are contiguous (a tick writes them, a replay walks them): (H, N, ...)
        self._hist = np.zeros((h, n, 12))
        self._h_range = np.full((h, n, r), np.nan)
        self._replay_back = np.zeros(n, dtype=np.int64)
        self._tick = 0
        self.rejected = np.zeros(n, dtype=np.int64)
        self.range_rejected = np.zeros(n, dtype=np.int64)
        self._streak = np.zeros(n, dtype=np.int64)
        self._work = np.zeros((5, 3, 3))
        self._no_beams = (np.empty((n, 0)), np.empty((n, 0), dtype=np.bool_))
        b = self.beams
        self._beam_args = (
            (np.zeros((0, 4)), np.zeros((0, 3)), np.zeros(0)) if b is None
            else (b.segments, b.mounts, b.variance)
        )

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Pose estimate (N, 3), field frame; :attr:`covariance` follows."""
        self._odo.update(readings, copy=False)
        slot = self._tick % self._depth
        self._tick += 1
        fix, valid, stamp = self._fixes.arrays(readings, self._pose.shape[0])
        ranges, range_valid = beam_readings(readings, self.beams, self._no_beams)
        segs, mounts, var = self._beam_args
        ekf_tick(
            float(t), self._dt, self._odo.increment, self._pose, self._cov, self._cs, self._noise,
            self._h_time, slot, min(self._tick, self._depth), self._hist, self._h_range,
            fix, valid, stamp, self._fixes.variance, self.gate, self.latency == "replay", self.reacquire,
            self._streak, self.rejected,
            ranges, range_valid, segs, mounts, var, self.range_gate, self.range_rejected,
            self._replay_back, self._work,
        )
        return self._pose.copy()

    @property
    def covariance(self) -> np.ndarray:
        """Covariance of the estimate (N, 3, 3) [m^2, m^2, rad^2], field frame."""
        return self._cov.copy()
