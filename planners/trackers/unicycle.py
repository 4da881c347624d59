"""Nonlinear time-varying tracking law for the unicycle (De Luca, Oriolo, Vendittelli)."""

from __future__ import annotations

from typing import ClassVar

import numpy as np
from numba import njit

from planners.params import Param
from planners.plan import Plan
from planners.se2 import wrap_one
from planners.trackers.base import SETTLE_PARAMS, TRACKERS, BodyCommand, TrackerBase, reference, settle


@njit(cache=True)
def _unicycle_kernel(pose, ref, vd, wd, zeta, b, vel_out):
    # k1 = k3 = 2 zeta sqrt(wd^2 + b vd^2), k2 = b  (De Luca et al. 2001, nonlinear tracking)
    k1 = 2.0 * zeta * np.sqrt(wd * wd + b * vd * vd)
    for i in range(pose.shape[0]):
        c = np.cos(pose[i, 2])
        s = np.sin(pose[i, 2])
        dx = ref[0] - pose[i, 0]
        dy = ref[1] - pose[i, 1]
        # tracking error in the robot frame
        e1 = c * dx + s * dy
        e2 = -s * dx + c * dy
        e3 = wrap_one(ref[2] - pose[i, 2])
        sinc = 1.0 - e3 * e3 / 6.0 if abs(e3) < 1e-4 else np.sin(e3) / e3
        # v = vd cos e3 - u1, w = wd - u2 with u1 = -k1 e1, u2 = -k2 vd sinc(e3) e2 - k3 e3
        vel_out[i, 0] = vd * np.cos(e3) + k1 * e1
        vel_out[i, 1] = 0.0
        vel_out[i, 2] = wd + b * vd * sinc * e2 + k1 * e3


@TRACKERS.register("unicycle")
class Unicycle(TrackerBase):
    """Trajectory tracking for a unicycle by a nonlinear time-varying feedback.

    Source: A. De Luca, G. Oriolo, M. Vendittelli, *Control of wheeled mobile robots: an
    experimental overview*, in RAMSETE, Lecture Notes in Control and Information Sciences 270,
    Springer (2001), the section on trajectory tracking (nonlinear control design).

    With the error in the robot frame ``e1, e2`` (position) and ``e3 = heading_d - heading``,

        v     = v_d cos e3 + k1 e1
        omega = omega_d + k2 v_d (sin e3 / e3) e2 + k3 e3
        k1 = k3 = 2 zeta a,  k2 = b,  a = sqrt(omega_d^2 + b v_d^2)

    which is globally asymptotically stable while the reference keeps moving (a Lyapunov
    argument in the source). Gains: damping ``zeta`` in (0, 1) and ``b > 0``
    [1/m^2], which sets the natural frequency ``a`` of the linearised error (so ``b`` acts as
    a bandwidth per speed squared). Reference from the plan by time; ``vy = 0`` on every
    chassis (a mecanum chassis follows the tangent heading of a tangent plan; a plan that
    strafes cannot be followed by this law); feedforward acceleration is the plan's. The gains
    vanish when the plan stops, so the error left at rest stays.

    Convergence: started 0.1 m and 10 deg off, the position error halves within
    ``2 / (zeta a)`` (:meth:`halving_time`).
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "zeta": Param("dimensionless", 0.7, "damping of the linearised error", gt=0.0, lt=1.0),
        "b": Param(
            "dimensionless", 25.0, "gain b [1/m^2]: natural frequency sqrt(w_d^2 + b v_d^2)", gt=0.0
        ),
        **SETTLE_PARAMS,
    }

    def reset(self, plan: Plan, n: int) -> None:
        """Start following ``plan`` with ``n`` robots."""
        self.plan = plan
        self.n = int(n)

    def natural_frequency(self, speed: float, turn_rate: float = 0.0) -> float:
        """Return the natural frequency ``a = sqrt(omega_d^2 + b v_d^2)`` [rad/s]."""
        return float(np.sqrt(turn_rate**2 + self.params["b"] * speed**2))

    def halving_time(self, speed: float, turn_rate: float = 0.0) -> float:
        """Time within which an initial error halves: ``2 / (zeta a)`` [s]."""
        return 2.0 / (self.params["zeta"] * self.natural_frequency(speed, turn_rate))

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """Unicycle tracking law toward the plan's reference at ``t``."""
        pose, velocity = self._check_batch(pose, velocity)
        ref, ref_vel, ref_acc = reference(self.plan, t)
        vel = np.empty((self.n, 3))
        _unicycle_kernel(
            pose,
            ref,
            float(ref_vel[0]),
            float(ref_vel[2]),
            self.params["zeta"],
            self.params["b"],
            vel,
        )
        acc = np.zeros((self.n, 3))
        acc[:, 0] = ref_acc[0]
        acc[:, 2] = ref_acc[2]
        cmd = BodyCommand(velocity=vel, accel=acc, target=np.tile(ref[:2], (self.n, 1)))
        p = self.params
        return settle(cmd, t, self.plan, pose, radius=p["settle_radius"], gain=p["settle_gain"])
