"""Stanley: heading error plus a cross-track term at a front reference point."""

from __future__ import annotations

from typing import ClassVar

import numpy as np
from numba import njit

from planners.params import Param
from planners.plan import Plan
from planners.se2 import wrap_one
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
from planners.trackers.geometry import Progress, path_point, search_window


@njit(cache=True)
def _front_points(pose, reverse, ell, out):
    for i in range(pose.shape[0]):
        h = pose[i, 2] + (np.pi if reverse else 0.0)
        out[i, 0] = pose[i, 0] + ell * np.cos(h)
        out[i, 1] = pose[i, 1] + ell * np.sin(h)


@njit(cache=True)
def _stanley_kernel(
    ps,
    px,
    py,
    ph,
    s,
    cross,
    front,
    pose,
    speed,
    direction,
    gain,
    soft,
    ell,
    max_steer,
    vel_out,
    target_out,
):
    reverse = direction < 0.0
    for i in range(pose.shape[0]):
        v = abs(speed[i])
        qx, qy, path_h = path_point(ps, px, py, ph, s[i])
        e = cross[i]
        if s[i] >= ps[-1]:
            # past the end: the path goes on as the straight line along its final direction
            e = np.cos(path_h) * (front[i, 1] - qy) - np.sin(path_h) * (front[i, 0] - qx)
        travel_h = pose[i, 2] + (np.pi if reverse else 0.0)
        # delta = psi + arctan(k e / (k_soft + v))  (Hoffmann et al. 2007, kinematic law);
        # e > 0 left of travel, so the cross-track term steers right
        delta = wrap_one(path_h - travel_h) - np.arctan(gain * e / (soft + v))
        delta = min(max_steer, max(-max_steer, delta))
        vel_out[i, 0] = speed[i]
        vel_out[i, 1] = 0.0
        # virtual bicycle of wheelbase ell: heading rate v tan(delta) / ell
        vel_out[i, 2] = v * np.tan(delta) / ell
        target_out[i, 0] = qx
        target_out[i, 1] = qy


@TRACKERS.register("stanley")
class Stanley(TrackerBase):
    """The Stanley steering law, adapted to a chassis without steered wheels.

    Source: G. M. Hoffmann, C. J. Tomlin, M. Montemerlo, S. Thrun, *Autonomous automobile
    trajectory tracking for off-road driving: controller design, experimental validation and
    racing*, American Control Conference (2007), the steering law of the kinematic model.

    Hoffmann's law steers the front wheels of a car to
    ``delta = psi + arctan(k e / (k_soft + v))``, with ``psi`` the heading error of the path at
    the point nearest the front axle and ``e`` the front axle's cross-track error, clipped to
    the steering limit.

    Adaptation to differential, skid and mecanum chassis (documented choice): the robot
    emulates a bicycle whose rear axle is the chassis centre and whose steered front axle is
    ``front_axle`` ahead in the direction of travel. ``delta`` from the law above is turned
    into the heading rate that bicycle would have, ``omega = |v| tan(delta) / front_axle``.
    The virtual front point then moves exactly like the car's front wheel, so Hoffmann's
    result carries over: for small errors the front cross-track error decays as
    ``exp(-k t)``, independent of speed. On reversed legs the virtual axle is placed behind
    the chassis (ahead in the direction of travel). No yaw-rate damping or steering-delay
    terms (Hoffmann's dynamic extensions) are used: the chassis has no steering actuator.
    Speed is the plan's speed at time ``t`` plus along-track feedback
    (:class:`~planners.trackers.base.AlongTrack`, our addition, off with
    ``along_track_gain = 0``); feedforward acceleration is the plan's;
    ``vy = 0``. Past the end of the path the virtual axle follows the straight line along
    the path's final direction, so the chassis arrives aligned with it. As for a car, the
    front point holds the path, so on a curve of radius R the chassis centre runs about
    ``front_axle^2 / (2 R)`` inside it.

    Convergence: started 0.1 m and 10 deg off, the cross-track error of the chassis centre
    halves within ``2 ln 2 / k + 2 front_axle / |v|`` (:meth:`halving_time`; the second
    term is the heading settling of the virtual bicycle).
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "gain": Param("dimensionless", 2.5, "cross-track gain k [1/s]", gt=0.0),
        "softening": Param("speed", 0.1, "k_soft, added to the speed in the arctan term", gt=0.0),
        "front_axle": Param(
            "length", 0.2, "distance of the virtual steered axle ahead of the centre", gt=0.0
        ),
        "along_track_gain": ALONG_TRACK_PARAM,
        "max_steer": Param(
            "angle", 1.2, "limit of the virtual steering angle", gt=0.0, lt=1.5707963
        ),
        **SETTLE_PARAMS,
    }

    def reset(self, plan: Plan, n: int) -> None:
        """Start following ``plan`` with ``n`` robots."""
        self.plan = plan
        self.n = int(n)
        self._progress = Progress(plan, self.n)
        self._centre = Progress(plan, self.n)
        self._along = AlongTrack(plan, self.params["along_track_gain"])
        self._front = np.empty((self.n, 2))
        self._started = False

    def halving_time(self, speed: float) -> float:
        """Time within which an initial error halves at plan speed ``speed`` [s]."""
        return 2.0 * np.log(2.0) / self.params["gain"] + 2.0 * self.params["front_axle"] / abs(
            speed
        )

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """Heading rate from the Stanley steering angle; see the class docstring."""
        pose, velocity = self._check_batch(pose, velocity)
        _, _, ref_acc = reference(self.plan, t)
        p = self.params
        direction = float(self._along.direction[self.plan.index(t)])
        _front_points(pose, direction < 0.0, p["front_axle"], self._front)
        # the first search reaches the virtual axle; later ones follow a few ticks of travel
        back, ahead = search_window(self._along.top, self.plan.dt)
        ahead += 0.0 if self._started else p["front_axle"]
        self._started = True
        cross = self._progress.update(self._front, back=back, ahead=ahead)
        # the centre's own progress sets the along-track speed
        self._centre.update(pose[:, :2], back=back, ahead=ahead)
        speed, _ = self._along.speed(t, self._centre.s)
        plan = self.plan
        vel = np.empty((self.n, 3))
        target = np.empty((self.n, 2))
        _stanley_kernel(
            plan.path_s,
            plan.path_x,
            plan.path_y,
            plan.path_heading,
            self._progress.s,
            cross,
            self._front,
            pose,
            speed,
            direction,
            p["gain"],
            p["softening"],
            p["front_axle"],
            p["max_steer"],
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
