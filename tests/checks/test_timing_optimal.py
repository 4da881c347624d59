"""Time-optimality of the timed plan against the convex formulation solved by linprog.

Sources: D. Verscheure, B. Demeulenaere, J. Swevers, J. De Schutter, M. Diehl, "Time-
optimal path tracking for robots: a convex optimization approach", IEEE Trans. Automatic
Control 54(10), 2009 (substitution b = v^2, which makes speed and acceleration limits
linear, eqs. of §III); T. Lipp, S. Boyd, "Minimum-time speed optimisation over a fixed
path", Int. J. Control 87(6), 2014 (the same problem in b, with the travel time
sum 2 ds / (sqrt(b_i) + sqrt(b_i+1))). With only bounds of the form b <= b_max and
|db/ds| <= const, the feasible set is closed under the pointwise maximum, so the solution
of  max sum(b)  (a linear programme, scipy.optimize.linprog / HiGHS) is also the
minimum-time one (common practice, no source). The bounds are built here from the path
geometry and the route's limits, independently of planners/timing.py, on a coarser grid;
the issue asks for agreement within 1%.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import linprog
from scipy.sparse import diags, vstack

from planners.routes import Route, Waypoint, route_path
from planners.timing import time_route

R_WHEEL, HALF_TRACK, K_MEC = 0.05, 0.15, 0.3


def diff_ik(q):
    return np.column_stack([(q[:, 0] - q[:, 2] * HALF_TRACK) / R_WHEEL,
                            (q[:, 0] + q[:, 2] * HALF_TRACK) / R_WHEEL])


def mecanum_ik(q):
    vx, vy, w = q[:, 0], q[:, 1], q[:, 2]
    return np.column_stack([vx - vy - K_MEC * w, vx + vy + K_MEC * w,
                            vx + vy - K_MEC * w, vx - vy + K_MEC * w]) / R_WHEEL


def lp_duration(route: Route, chassis: str, ik, wheel_max: float, step: float = 0.01) -> float:
    rp = route_path(route, chassis=chassis)
    s = rp.path.grid(step)
    smp = rp.evaluate(s)
    kappa = smp.geometry.curvature
    rel = smp.geometry.direction - smp.heading
    unit_twist = np.column_stack([np.cos(rel), np.sin(rel), smp.heading_rate])
    with np.errstate(divide="ignore"):
        b_max = np.minimum.reduce([
            np.full(len(s), route.max_speed**2),
            route.lateral_accel / np.abs(kappa),  # v^2 |kappa| <= a_lat
            (route.max_turn_rate / np.abs(smp.heading_rate)) ** 2,
            (route.wheel_speed_margin * wheel_max / np.abs(ik(unit_twist)).max(axis=1)) ** 2,
        ])
    knots = np.searchsorted(s, rp.knot_s)
    for k, wp in enumerate(route.waypoints, start=1):
        if wp.speed is not None:
            b_max[knots[k]] = min(b_max[knots[k]], wp.speed**2)
    b_max[knots[rp.stops]] = 0.0
    n = len(s)
    ds = np.diff(s)
    d = diags([-np.ones(n - 1), np.ones(n - 1)], [0, 1], shape=(n - 1, n))
    # (b_i+1 - b_i) / (2 ds) <= a_max  and  (b_i - b_i+1) / (2 ds) <= d_max   (Verscheure 2009)
    a_ub = vstack([d, -d]).tocsr()
    b_ub = np.concatenate([2 * route.max_accel * ds, 2 * route.decel * ds])
    res = linprog(-np.ones(n), A_ub=a_ub, b_ub=b_ub, bounds=list(zip(np.zeros(n), b_max)),
                  method="highs")
    assert res.status == 0, res.message
    v = np.sqrt(np.maximum(res.x, 0.0))
    # travel time with constant acceleration in each cell (Lipp & Boyd 2014)
    return float(np.sum(2 * ds / (v[:-1] + v[1:]))) + float(rp.dwell.sum())


CASES = {
    "differential": (
        Route(start=(0.0, 0.0, 0.0), max_speed=1.5, max_accel=2.0, max_decel=1.2,
              max_lateral_accel=1.0, max_turn_rate=2.5, waypoints=(
                  Waypoint(at=(2.0, 0.0)), Waypoint(at=(3.0, 1.0), speed=0.4),
                  Waypoint(at=(2.0, 2.0), dwell=0.4), Waypoint(at=(0.5, 2.0)),
                  Waypoint(at=(1.5, 1.0), reverse=True))),
        "differential", diff_ik, 28.0),
    "mecanum-blend": (
        Route(start=(0.0, 0.0, 0.0), heading="blend", max_speed=2.0, max_accel=1.5,
              max_lateral_accel=1.5, max_turn_rate=3.0, waypoints=(
                  Waypoint(at=(2.0, 0.0), heading=1.0), Waypoint(at=(3.0, 1.5)),
                  Waypoint(at=(1.0, 2.5), heading=-2.0), Waypoint(at=(-0.5, 1.0)))),
        "mecanum", mecanum_ik, 30.0),
}


@pytest.mark.parametrize("name", list(CASES))
def test_plan_duration_equals_the_convex_optimum(name):
    route, chassis, ik, wheel_max = CASES[name]
    plan = time_route(route, chassis=chassis, rate=200.0, inverse_kinematics=ik,
                      max_wheel_speed=wheel_max)
    t_lp = lp_duration(route, chassis, ik, wheel_max)
    # Verscheure et al. 2009 / Lipp & Boyd 2014 optimum; issue tolerance 1%
    assert plan.duration == pytest.approx(t_lp, rel=0.01)
