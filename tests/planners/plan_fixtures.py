"""Plans made by hand for tracker tests: a line, a circle and a figure-eight.

Each plan comes from an analytic curve p(t) with its derivatives up to jerk, so pose, body
velocity, body acceleration, curvature and arc length are exact at every tick and agree
with each other as :class:`planners.plan.Plan` defines them. The plans start already moving
(no ramp), which suits convergence checks.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.integrate import cumulative_trapezoid

from planners.plan import Plan

Curve = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]]


def plan_from_curve(
    curve: Curve,
    duration: float,
    *,
    dt: float = 0.005,
    heading: str = "tangent",
    hold: float = 0.0,
    reverse: bool = False,
    ds: float = 0.002,
    name: str = "curve",
) -> Plan:
    """Sample an analytic curve into a Plan.

    Parameters
    ----------
    curve : callable — t (T,) -> p, p', p'', p''' each (T, 2), field frame
    duration : float — [s]
    dt : float — tick [s]
    heading : "tangent" (heading along travel) or "hold" (constant ``hold`` heading)
    reverse : bool — with "tangent", drive backwards (heading = travel direction + pi)
    ds : float — spacing of the arc-length samples [m]
    """
    t = np.arange(int(round(duration / dt)) + 1) * dt
    p, v, a, j = curve(t)
    speed = np.hypot(v[:, 0], v[:, 1])
    cross = v[:, 0] * a[:, 1] - v[:, 1] * a[:, 0]
    tangent = np.unwrap(np.arctan2(v[:, 1], v[:, 0]))
    turn = cross / speed**2
    # d/dt (cross / |v|^2) with cross' = vx jy - vy jx and (|v|^2)' = 2 v.a
    cross_dot = v[:, 0] * j[:, 1] - v[:, 1] * j[:, 0]
    turn_dot = (cross_dot * speed**2 - cross * 2.0 * np.sum(v * a, axis=1)) / speed**4
    if heading == "tangent":
        theta = tangent + (np.pi if reverse else 0.0)
        w, w_dot = turn, turn_dot
    else:
        theta = np.full_like(t, hold)
        w, w_dot = np.zeros_like(t), np.zeros_like(t)
    c, s = np.cos(theta), np.sin(theta)
    vb = np.stack([c * v[:, 0] + s * v[:, 1], -s * v[:, 0] + c * v[:, 1], w], axis=1)
    ra = np.stack([c * a[:, 0] + s * a[:, 1], -s * a[:, 0] + c * a[:, 1]], axis=1)
    # body accel: d/dt (R^T p') = R^T p'' - w S v_b
    ab = np.stack([ra[:, 0] + w * vb[:, 1], ra[:, 1] - w * vb[:, 0], w_dot], axis=1)
    pose = np.column_stack([p, (theta + np.pi) % (2 * np.pi) - np.pi])

    fine_t = np.linspace(0.0, t[-1], 20 * len(t) + 1)
    fine_v = curve(fine_t)[1]
    fine_s = cumulative_trapezoid(np.hypot(fine_v[:, 0], fine_v[:, 1]), fine_t, initial=0.0)
    s_t = np.interp(t, fine_t, fine_s)
    path_s = np.linspace(0.0, fine_s[-1], int(np.ceil(fine_s[-1] / ds)) + 1)
    t_of_s = np.interp(path_s, fine_s, fine_t)
    pp, pv, _, _ = curve(t_of_s)
    path_heading = np.unwrap(np.arctan2(pv[:, 1], pv[:, 0]))
    return Plan(
        dt=dt,
        t=t,
        pose=pose,
        velocity=vb,
        accel=ab,
        curvature=cross / speed**3,
        s=s_t,
        path_x=np.ascontiguousarray(pp[:, 0]),
        path_y=np.ascontiguousarray(pp[:, 1]),
        path_s=path_s,
        path_heading=path_heading,
        notes={"fixture": name},
    )


def line_plan(
    *, speed: float = 0.5, length: float = 3.0, dt: float = 0.005, reverse: bool = False
) -> Plan:
    """Straight line from the origin along +x at constant ``speed``."""

    def curve(t):
        z = np.zeros_like(t)
        return (
            np.column_stack([speed * t, z]),
            np.column_stack([z + speed, z]),
            np.column_stack([z, z]),
            np.column_stack([z, z]),
        )

    return plan_from_curve(curve, length / speed, dt=dt, reverse=reverse, name="line")


def circle_plan(
    *, radius: float = 1.0, speed: float = 0.5, turns: float = 1.0, dt: float = 0.005
) -> Plan:
    """Counter-clockwise circle from the origin, heading +x, centre (0, radius)."""
    w = speed / radius

    def curve(t):
        c, s = np.cos(w * t), np.sin(w * t)
        r = radius
        return (
            np.column_stack([r * s, r * (1 - c)]),
            np.column_stack([r * w * c, r * w * s]),
            np.column_stack([-r * w**2 * s, r * w**2 * c]),
            np.column_stack([-r * w**3 * c, -r * w**3 * s]),
        )

    return plan_from_curve(curve, turns * 2 * np.pi / w, dt=dt, name="circle")


def figure_eight_plan(
    *,
    size: float = 1.0,
    period: float = 20.0,
    dt: float = 0.005,
    heading: str = "tangent",
    hold: float = 0.0,
) -> Plan:
    """Lemniscate of Gerono x = a sin(phi), y = (a/2) sin(2 phi), phi = 2 pi t / period.

    One full figure-eight, from the crossing point at the origin heading 45 deg; speeds
    between ``a W`` and ``sqrt(2) a W`` with ``W = 2 pi / period``.
    """
    a = size
    om = 2 * np.pi / period

    def curve(t):
        ph = om * t
        return (
            np.column_stack([a * np.sin(ph), 0.5 * a * np.sin(2 * ph)]),
            np.column_stack([a * om * np.cos(ph), a * om * np.cos(2 * ph)]),
            np.column_stack([-a * om**2 * np.sin(ph), -2 * a * om**2 * np.sin(2 * ph)]),
            np.column_stack([-a * om**3 * np.cos(ph), -4 * a * om**3 * np.cos(2 * ph)]),
        )

    return plan_from_curve(curve, period, dt=dt, heading=heading, hold=hold, name="figure-eight")


def drive_kinematic(tracker, plan: Plan, pose0: np.ndarray, ticks: int | None = None) -> np.ndarray:
    """Drive a tracker on an ideal kinematic plant: no slip, perfect sensing.

    Each tick the commanded body twist is held for one period and integrated exactly with
    :func:`planners.se2.exp`; the tracker sees the true pose and the velocity it is driving.

    Parameters
    ----------
    tracker : a tracker (already built)
    plan : Plan
    pose0 : ndarray, shape (N, 3) — start poses, field frame
    ticks : int, optional — default: the plan's length

    Returns
    -------
    ndarray, shape (ticks, N, 3) — pose at the start of every tick
    """
    from planners import se2

    n = pose0.shape[0]
    ticks = len(plan.t) if ticks is None else ticks
    tracker.reset(plan, n)
    pose = np.array(pose0, dtype=np.float64)
    vel = np.tile(plan.velocity[0], (n, 1))
    out = np.empty((ticks, n, 3))
    for k in range(ticks):
        out[k] = pose
        vel = tracker.command(k * plan.dt, pose, vel).velocity
        pose = se2.compose(pose, se2.exp(vel * plan.dt))
    return out
