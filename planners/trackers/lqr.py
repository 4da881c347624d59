"""Time-varying LQR on the unicycle error dynamics, gains scheduled by plan speed."""

from __future__ import annotations

from typing import ClassVar

import numpy as np
from numba import njit

from planners.gains import bryson, discretise, dlqr
from planners.params import Param
from planners.plan import Plan
from planners.se2 import wrap_one
from planners.trackers.base import SETTLE_PARAMS, TRACKERS, BodyCommand, TrackerBase, reference, settle


def error_model(speed: float, turn_rate: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Unicycle tracking error dynamics linearised about a reference moving at ``speed``.

    Error ``x = [ex, ey, etheta]``: position error ``R(-theta_d) (p - p_d)`` in the reference
    frame and ``theta - theta_d``; input ``u = [v - v_d, omega - omega_d]``::

        d/dt ex     =  omega_d ey + dv
        d/dt ey     = -omega_d ex + v_d etheta
        d/dt etheta =  domega

    Parameters
    ----------
    speed : float — v_d [m/s], negative when reversing
    turn_rate : float — omega_d [rad/s] (the tracker designs with 0, see :class:`LQR`)

    Returns
    -------
    A : ndarray, shape (3, 3)
    B : ndarray, shape (3, 2)
    """
    a = np.array([[0.0, turn_rate, 0.0], [-turn_rate, 0.0, speed], [0.0, 0.0, 0.0]])
    b = np.array([[1.0, 0.0], [0.0, 0.0], [0.0, 1.0]])
    return a, b


@njit(cache=True)
def _scheduled_gain(speeds, gains, speed):
    # linear interpolation of the (2, 3) gains in the design speed, clamped beyond the grid
    j = min(max(np.searchsorted(speeds, speed) - 1, 0), speeds.shape[0] - 2)
    u = min(max((speed - speeds[j]) / (speeds[j + 1] - speeds[j]), 0.0), 1.0)
    return (1.0 - u) * gains[j] + u * gains[j + 1]


@njit(cache=True)
def _lqr_kernel(pose, ref, ref_vel, ref_acc, speeds, schedule, vel_out, acc_out, target_out):
    vd, wd = ref_vel[0], ref_vel[2]
    gains = _scheduled_gain(speeds, schedule, vd)
    c = np.cos(ref[2])
    s = np.sin(ref[2])
    for i in range(pose.shape[0]):
        acc_out[i, 0] = ref_acc[0]
        acc_out[i, 1] = 0.0
        acc_out[i, 2] = ref_acc[2]
        target_out[i, 0] = ref[0]
        target_out[i, 1] = ref[1]
        dx = pose[i, 0] - ref[0]
        dy = pose[i, 1] - ref[1]
        ex = c * dx + s * dy
        ey = -s * dx + c * dy
        et = wrap_one(pose[i, 2] - ref[2])
        # u = -K x
        vel_out[i, 0] = vd - (gains[0, 0] * ex + gains[0, 1] * ey + gains[0, 2] * et)
        vel_out[i, 1] = 0.0
        vel_out[i, 2] = wd - (gains[1, 0] * ex + gains[1, 1] * ey + gains[1, 2] * et)


@TRACKERS.register("lqr")
class LQR(TrackerBase):
    """Discrete time-varying LQR about the plan, gain-scheduled by the plan's speed.

    Source: the method is the discrete linear-quadratic regulator (Kalman 1960; textbook form
    in Franklin, Powell, Workman, *Digital Control of Dynamic Systems*, 3rd ed. (1998),
    ch. 9) applied to the unicycle tracking error linearised about the reference, as in
    De Luca, Oriolo, Vendittelli, *Control of wheeled mobile robots: an experimental
    overview* (2001), linear tracking design.

    The error model of :func:`error_model` is discretised exactly at the plan's period
    (zero-order hold) and the DARE is solved (:func:`planners.gains.dlqr`) on a grid of
    design speeds ``+-linspace(min_speed, max plan speed, schedule_points)``, with Bryson's
    weights from the ``max_*`` keys. Each tick the gain is interpolated linearly in the plan
    speed at ``t``; between ``-min_speed`` and ``+min_speed`` (where the lateral error is not
    controllable) it blends through zero lateral gain, as the gain changes sign with the
    speed. The design uses ``omega_d = 0`` (gains scheduled by speed alone); the coupling
    ``omega_d`` terms are left to the feedback. Reference by time; ``vy = 0``; feedforward
    acceleration is the plan's. Past the plan's end, near the end pose, the final alignment of
    :func:`planners.trackers.base.settle` drives onto it (at rest the lateral error is not
    controllable).

    Convergence: started 0.1 m and 10 deg off, the position error halves within
    ``2 / sigma``, where ``sigma = -ln(max |eig(Ad - Bd K)|) / dt`` is the decay rate of the
    slowest closed-loop pole at that speed (:meth:`halving_time`).
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "max_position_error": Param(
            "length", 0.05, "Bryson: largest acceptable position error", gt=0.0
        ),
        "max_heading_error": Param(
            "angle", 0.15, "Bryson: largest acceptable heading error", gt=0.0
        ),
        "max_speed_correction": Param("speed", 0.3, "Bryson: largest speed correction", gt=0.0),
        "max_turn_correction": Param(
            "angular_speed", 1.5, "Bryson: largest turn-rate correction", gt=0.0
        ),
        "min_speed": Param("speed", 0.02, "smallest design speed of the schedule", gt=0.0),
        "schedule_points": Param("count", 16, "design speeds per direction", ge=2),
        **SETTLE_PARAMS,
    }

    def weights(self) -> tuple[np.ndarray, np.ndarray]:
        """Bryson's Q (3, 3) and R (2, 2) from the ``max_*`` keys."""
        p = self.params
        return bryson(
            [p["max_position_error"], p["max_position_error"], p["max_heading_error"]],
            [p["max_speed_correction"], p["max_turn_correction"]],
        )

    def design(self, speed: float, dt: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Discretised model and LQR gain at one design speed.

        Returns
        -------
        Ad : ndarray, shape (3, 3)
        Bd : ndarray, shape (3, 2)
        K : ndarray, shape (2, 3) — ``u = -K x``
        """
        ad, bd = discretise(*error_model(speed), dt)
        q, r = self.weights()
        return ad, bd, dlqr(ad, bd, q, r)[0]

    def reset(self, plan: Plan, n: int) -> None:
        """Start following ``plan`` with ``n`` robots; solves the gain schedule."""
        self.plan = plan
        self.n = int(n)
        p = self.params
        top = max(float(np.max(np.abs(plan.velocity[:, 0]), initial=0.0)), 2.0 * p["min_speed"])
        pos = np.linspace(p["min_speed"], top, int(p["schedule_points"]))
        self.schedule_speeds = np.ascontiguousarray(np.concatenate([-pos[::-1], pos]))
        self.schedule_gains = np.ascontiguousarray(np.stack([self.design(v, plan.dt)[2] for v in self.schedule_speeds]))

    def gain(self, speed: float) -> np.ndarray:
        """Scheduled gain at plan speed ``speed``, shape (2, 3) (clamped beyond the grid)."""
        return _scheduled_gain(self.schedule_speeds, self.schedule_gains, float(speed))

    def halving_time(self, speed: float) -> float:
        """Time within which an initial error halves at plan speed ``speed``: ``2 / sigma`` [s]."""
        dt = self.plan.dt
        ad, bd, k = self.design(speed, dt)
        radius = float(np.max(np.abs(np.linalg.eigvals(ad - bd @ k))))
        return 2.0 * dt / -np.log(radius)

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """Plan velocity minus the scheduled LQR gain times the tracking error."""
        pose, velocity = self._check_batch(pose, velocity)
        ref, ref_vel, ref_acc = reference(self.plan, t)
        vel = np.empty((self.n, 3))
        acc = np.empty((self.n, 3))
        target = np.empty((self.n, 2))
        _lqr_kernel(pose, ref, ref_vel, ref_acc, self.schedule_speeds, self.schedule_gains, vel, acc, target)
        cmd = BodyCommand(velocity=vel, accel=acc, target=target)
        # at rest the lateral error is not controllable: the final alignment takes over
        p = self.params
        return settle(cmd, t, self.plan, pose, radius=p["settle_radius"], gain=p["settle_gain"])
