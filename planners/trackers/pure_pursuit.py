"""Pure pursuit: steer on the arc through a goal point one lookahead away on the path."""

from __future__ import annotations

from typing import ClassVar

import numpy as np
from numba import njit

from planners.params import Param
from planners.plan import Plan
from planners.trackers.base import (
    ALONG_TRACK_PARAM,
    SETTLE_PARAMS,
    TRACKERS,
    AlongTrack,
    BodyCommand,
    TrackerBase,
    settle,
    reference,
)
from planners.trackers.geometry import Progress, circle_crossing, search_window


@njit(cache=True, inline="always")
def _curvature_one(x: float, y: float) -> float:
    # gamma = 2 x_lat / l^2 with l^2 = x^2 + y^2  (Coulter 1992, derivation of the curvature)
    d2 = x * x + y * y
    return 2.0 * y / d2 if d2 > 1e-18 else 0.0


@njit(cache=True)
def _curvature_kernel(goal: np.ndarray, out: np.ndarray) -> None:
    for i in range(goal.shape[0]):
        out[i] = _curvature_one(goal[i, 0], goal[i, 1])


def pursuit_curvature(goal: np.ndarray) -> np.ndarray:
    """Curvature of the arc from the robot, tangent to its heading, through a goal point.

    Parameters
    ----------
    goal : ndarray, shape (N, 2) — goal point in the robot (body) frame [m], x forward, y left

    Returns
    -------
    ndarray, shape (N,) — ``2 y / (x^2 + y^2)`` [1/m], positive turning left; 0 at the origin

    Examples
    --------
    >>> pursuit_curvature(np.array([[1.0, 1.0]]))
    array([1.])
    """
    goal = np.ascontiguousarray(goal, dtype=np.float64).reshape(-1, 2)
    out = np.empty(goal.shape[0])
    _curvature_kernel(goal, out)
    return out


@njit(cache=True)
def _pursuit_kernel(ps, px, py, end_heading, s, pose, speed, lookahead, vel_out, target_out):
    for i in range(pose.shape[0]):
        x = pose[i, 0]
        y = pose[i, 1]
        gx, gy = circle_crossing(ps, px, py, end_heading, s[i], x, y, lookahead)
        c = np.cos(pose[i, 2])
        sn = np.sin(pose[i, 2])
        dx = gx - x
        dy = gy - y
        kappa = _curvature_one(c * dx + sn * dy, -sn * dx + c * dy)
        vel_out[i, 0] = speed[i]
        vel_out[i, 1] = 0.0
        vel_out[i, 2] = speed[i] * kappa
        target_out[i, 0] = gx
        target_out[i, 1] = gy


@TRACKERS.register("pure-pursuit")
class PurePursuit(TrackerBase):
    """Pure pursuit path tracking.

    Source: R. Craig Coulter, *Implementation of the Pure Pursuit Path Tracking Algorithm*,
    Carnegie Mellon University, CMU-RI-TR-92-01 (1992).

    Each tick the robot is projected onto the path; the goal point is the first path point
    ahead of that projection lying one lookahead distance ``L`` from the robot (Coulter: "find
    the goal point"); the robot drives the arc through it, of curvature ``2 y / L^2`` with
    ``y`` the goal's lateral offset in the robot frame (Coulter's derivation). The speed is the
    plan's speed at time ``t`` (negative on reversed legs, then the arc is driven backwards)
    plus along-track feedback (:class:`~planners.trackers.base.AlongTrack`, our addition, off
    with ``along_track_gain = 0``); the heading rate is ``speed * curvature``. Feedforward
    acceleration is the plan's. On a mecanum chassis it drives like a differential one
    (``vy = 0``) and follows the path tangent, not the plan's heading schedule.

    ``L = lookahead + lookahead_time * |plan speed|`` (fixed when ``lookahead_time = 0``).
    When the robot is farther than ``L`` from the path the goal is its nearest path point;
    near the end the path is extended along its final direction, so the robot arrives aligned
    with it rather than turning onto the last point.
    On a curve of radius R the robot settles about ``L^2 / (2 R)`` inside the path (the goal
    lies on the path, the robot on a chord-cutting circle): the usual pure-pursuit trade-off.

    Convergence: linearised about a straight path, lateral error e obeys
    ``e'' + (2 v / L) e' + (2 v^2 / L^2) e = 0`` (natural frequency ``sqrt(2) v / L``, damping
    ``1/sqrt(2)``). Started 0.1 m and 10 deg off, the cross-track error halves within
    ``2 L / |v|`` (:meth:`halving_time`; tests/checks/test_tracker_convergence.py).
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "lookahead": Param(
            "length", 0.3, "lookahead distance (the minimum one with lookahead_time)", gt=0.0
        ),
        "along_track_gain": ALONG_TRACK_PARAM,
        "lookahead_time": Param(
            "time", 0.0, "lookahead grows by this time times the plan speed", ge=0.0
        ),
        **SETTLE_PARAMS,
    }

    def reset(self, plan: Plan, n: int) -> None:
        """Start following ``plan`` with ``n`` robots."""
        self.plan = plan
        self.n = int(n)
        self._progress = Progress(plan, self.n)
        self._along = AlongTrack(plan, self.params["along_track_gain"])

    def lookahead_at(self, speed: float) -> float:
        """Lookahead distance at plan speed ``speed`` [m]."""
        return self.params["lookahead"] + self.params["lookahead_time"] * abs(speed)

    def halving_time(self, speed: float) -> float:
        """Time within which an initial error halves at plan speed ``speed``: ``2 L / |v|`` [s]."""
        return 2.0 * self.lookahead_at(speed) / abs(speed)

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """Arc through the goal point at the plan's speed; see the class docstring."""
        pose, velocity = self._check_batch(pose, velocity)
        _, _, ref_acc = reference(self.plan, t)
        plan_speed = self._along.plan_speed(t)
        back, ahead = search_window(self._along.top, self.plan.dt)
        self._progress.update(pose[:, :2], back=back, ahead=ahead)
        speed, _ = self._along.speed(t, self._progress.s)
        plan = self.plan
        vel = np.empty((self.n, 3))
        target = np.empty((self.n, 2))
        _pursuit_kernel(
            plan.path_s,
            plan.path_x,
            plan.path_y,
            float(plan.path_heading[-1]),
            self._progress.s,
            pose,
            speed,
            self.lookahead_at(plan_speed),
            vel,
            target,
        )
        acc = np.zeros((self.n, 3))
        acc[:, 0] = self._along.accel(t)
        # the plan's heading schedule is the path tangent's unless the plan strafes
        acc[:, 2] = 0.0 if self._along.strafing else ref_acc[2]
        cmd = BodyCommand(velocity=vel, accel=acc, target=target)
        p = self.params
        return settle(cmd, t, self.plan, pose, radius=p["settle_radius"], gain=p["settle_gain"])
