"""Unit tests of planners/timing.py: limits, exact ticks, rest at the end, dwells, jerk."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from planners.errors import PlanError
from planners.profiles import s_curve_profile, trapezoidal_profile
from planners.routes import Route, Waypoint
from planners.se2 import wrap
from planners.timing import plan_summary, time_route

R_WHEEL, HALF_TRACK, K_MEC = 0.05, 0.15, 0.3


def diff_ik(q):  # r w = v -/+ omega * track / 2
    return np.column_stack([(q[:, 0] - q[:, 2] * HALF_TRACK) / R_WHEEL,
                            (q[:, 0] + q[:, 2] * HALF_TRACK) / R_WHEEL])


def mecanum_ik(q):  # FL, FR, RL, RR; k = half wheelbase + half track
    vx, vy, w = q[:, 0], q[:, 1], q[:, 2]
    return np.column_stack([vx - vy - K_MEC * w, vx + vy + K_MEC * w,
                            vx + vy - K_MEC * w, vx - vy + K_MEC * w]) / R_WHEEL


WPS = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(3.0, 1.0), speed=0.4),
       Waypoint(at=(2.0, 2.0), dwell=0.4), Waypoint(at=(0.5, 2.0)),
       Waypoint(at=(1.5, 1.0), reverse=True))
LIMITS = {"max_speed": 1.5, "max_accel": 2.0, "max_decel": 1.2, "max_lateral_accel": 1.0,
          "max_turn_rate": 2.5}


def _route(**kw):
    return Route(**{"start": (0.0, 0.0, 0.0), "waypoints": WPS, **LIMITS, **kw})


CASES = {
    "differential": dict(route=_route(), chassis="differential", inverse_kinematics=diff_ik,
                         max_wheel_speed=28.0),
    "skid-jerk": dict(route=_route(max_jerk=10.0), chassis="skid", inverse_kinematics=diff_ik,
                      max_wheel_speed=28.0),
    "mecanum-blend": dict(
        route=_route(heading="blend", waypoints=(
            Waypoint(at=(2.0, 0.0), heading=1.0), Waypoint(at=(3.0, 1.0), speed=0.4),
            Waypoint(at=(2.0, 2.0), heading=-2.0, dwell=0.4), Waypoint(at=(0.5, 2.0)))),
        chassis="mecanum", inverse_kinematics=mecanum_ik, max_wheel_speed=30.0),
}


@pytest.fixture(scope="module", params=list(CASES))
def case(request):
    kw = CASES[request.param]
    return kw, time_route(rate=1000.0, **kw)


def _path_speed(plan):
    v = np.hypot(plan.velocity[:, 0], plan.velocity[:, 1])
    a = np.gradient(v, plan.dt)  # for checks only: the plan gives body-frame components
    return v, a


def test_plan_never_exceeds_a_limit(case):
    kw, plan = case
    route = kw["route"]
    v = np.hypot(plan.velocity[:, 0], plan.velocity[:, 1])
    tol = 1.0 + 1e-3
    assert v.max() <= route.max_speed * tol
    assert (v**2 * np.abs(plan.curvature)).max() <= route.lateral_accel * tol
    assert np.abs(plan.velocity[:, 2]).max() <= route.max_turn_rate * tol
    wheels = kw["inverse_kinematics"](plan.velocity)
    assert np.abs(wheels).max() <= route.wheel_speed_margin * kw["max_wheel_speed"] * tol
    # path acceleration from the plan's own arc length (second difference)
    acc = np.diff(plan.s, 2) / plan.dt**2
    assert acc.max() <= route.max_accel * tol and acc.min() >= -route.decel * tol
    # waypoint speed cap: the tick nearest the point moves at most one tick's acceleration
    s_cap = plan.notes["waypoints_s"][2]
    k = np.argmin(np.abs(plan.s - s_cap))
    assert v[k] <= 0.4 + route.max_accel * plan.dt * 2
    if route.max_jerk is not None:
        assert np.abs(np.diff(acc)).max() / plan.dt <= route.max_jerk * (1 + 1e-3)


def test_ticks_are_exact_and_the_plan_ends_at_rest_on_the_last_waypoint(case):
    kw, plan = case
    n = len(plan.t)
    assert np.array_equal(plan.t, np.arange(n) * plan.dt)
    assert plan.pose.shape == plan.velocity.shape == plan.accel.shape == (n, 3)
    assert np.allclose(plan.pose[-1, :2], kw["route"].waypoints[-1].at, atol=1e-9)
    assert np.allclose(plan.velocity[-1], 0.0, atol=1e-9)
    assert plan.s[-1] == pytest.approx(plan.length, abs=1e-12)
    assert np.all(np.diff(plan.s) >= -1e-12)


def test_dwell_is_stationary(case):
    _, plan = case
    s_dwell = plan.notes["waypoints_s"][3]
    at = np.abs(plan.s - s_dwell) < 1e-9
    moving = np.maximum(np.abs(plan.velocity).max(axis=1), np.abs(plan.accel).max(axis=1))
    still = at & (moving < 1e-9)
    assert still.sum() >= round(0.4 / plan.dt) - 1
    assert at.sum() <= round(0.4 / plan.dt) + 3  # and no longer than the dwell


def test_velocity_and_acceleration_are_the_derivatives_of_the_pose(case):
    _, plan = case
    dt = plan.dt
    pose = plan.pose
    mid = pose[1:-1]
    dxy = (pose[2:, :2] - pose[:-2, :2]) / (2 * dt)
    c, s = np.cos(mid[:, 2]), np.sin(mid[:, 2])
    body = np.column_stack([c * dxy[:, 0] + s * dxy[:, 1], -s * dxy[:, 0] + c * dxy[:, 1]])
    dth = wrap(pose[2:, 2] - pose[:-2, 2]) / (2 * dt)
    assert np.abs(body - plan.velocity[1:-1, :2]).max() < 5e-3
    assert np.abs(dth - plan.velocity[1:-1, 2]).max() < 2e-2
    dv = (plan.velocity[2:] - plan.velocity[:-2]) / (2 * dt)
    jump = np.abs(np.diff(plan.accel, axis=0)).max(axis=1)
    smooth = (jump[1:] < 0.05) & (jump[:-1] < 0.05)  # away from jumps of acceleration
    assert np.abs(dv - plan.accel[1:-1])[smooth].max() < 5e-2


def test_dwell_at_the_end_holds_the_plan_there():
    wps = (Waypoint(at=(1.0, 0.0)), Waypoint(at=(2.0, 0.0), dwell=0.5))
    route = Route(start=(0.0, 0.0, 0.0), max_speed=1.0, max_accel=1.0, waypoints=wps)
    with_dwell = time_route(route, chassis="differential", rate=100.0)
    plain = dataclasses.replace(route, waypoints=(wps[0], Waypoint(at=(2.0, 0.0))))
    without = time_route(plain, chassis="differential", rate=100.0)
    assert with_dwell.duration == pytest.approx(without.duration + 0.5, abs=0.011)
    assert np.allclose(with_dwell.pose[-51:, :2], [2.0, 0.0], atol=1e-9)


def test_reverse_leg_drives_backwards():
    plan = time_route(_route(), chassis="differential", rate=200.0)
    s_cusp = plan.notes["waypoints_s"][4]
    back = plan.s > s_cusp + 1e-6
    assert np.all(plan.velocity[back & (plan.s < plan.length - 1e-6), 0] < 0.0)
    assert np.allclose(plan.velocity[:, 1], 0.0, atol=1e-12)  # never strafes
    assert [st["why"] for st in plan.notes["stops"]] == ["start", "dwell", "cusp", "end"]


def test_straight_route_takes_the_trapezoid_time():
    route = Route(start=(0.0, 0.0, 0.0), max_speed=1.2, max_accel=1.5, max_decel=0.8,
                  waypoints=(Waypoint(at=(3.0, 0.0)), Waypoint(at=(5.0, 0.0))))
    plan = time_route(route, chassis="differential", rate=200.0)
    ref = trapezoidal_profile(5.0, max_speed=1.2, max_accel=1.5, max_decel=0.8)
    assert plan.duration == pytest.approx(np.ceil(ref.duration * 200 - 1e-9) / 200, abs=1e-12)
    q, v, _, _ = ref.sample(plan.t)
    assert np.allclose(plan.s, q, atol=1e-9)
    assert np.allclose(plan.velocity[:, 0], v, atol=1e-9)


def test_straight_route_with_jerk_takes_the_s_curve_time():
    route = Route(start=(0.0, 0.0, 0.0), max_speed=1.0, max_accel=1.0, max_jerk=4.0,
                  waypoints=(Waypoint(at=(4.0, 0.0)),))
    plan = time_route(route, chassis="differential", rate=200.0)
    ref = s_curve_profile(4.0, max_speed=1.0, max_accel=1.0, max_jerk=4.0)
    assert plan.duration == pytest.approx(np.ceil(ref.duration * 200 - 1e-9) / 200, abs=1e-12)
    assert np.allclose(plan.s, ref.sample(plan.t)[0], atol=1e-9)


def test_binding_notes_and_summary():
    plan = time_route(_route(), chassis="differential", rate=200.0, inverse_kinematics=diff_ik,
                      max_wheel_speed=28.0)
    runs = plan.notes["binding"]
    names = {r["limit"] for r in runs}
    assert {"max_accel", "max_decel", "max_lateral_accel", "speed_cap"} <= names
    assert names <= {"max_accel", "max_decel", "max_speed", "max_lateral_accel",
                     "max_turn_rate", "wheel_speed", "speed_cap", "max_jerk"}
    assert runs[0]["s_start"] == 0.0 and runs[-1]["s_end"] == pytest.approx(plan.length)
    assert all(a["s_end"] == b["s_start"] for a, b in zip(runs[:-1], runs[1:]))
    summary = plan_summary(plan)
    assert summary["length_m"] == plan.length and summary["duration_s"] == plan.duration
    assert summary["peak_speed_mps"] <= 1.5 + 1e-9
    assert summary["peak_decel_mps2"] == pytest.approx(1.2, rel=1e-6)
    assert sum(summary["time_share"].values()) == pytest.approx(1.0)


@pytest.mark.parametrize("kw, match", [
    ({"rate": 0.0}, "rate must be > 0 Hz, got 0.0"),
    ({"inverse_kinematics": diff_ik}, "inverse_kinematics and max_wheel_speed must be given "
                                      "together"),
    ({"inverse_kinematics": lambda q: q**2, "max_wheel_speed": 10.0}, "linearly"),
    ({"max_wheel_speed": -1.0, "inverse_kinematics": diff_ik}, "max_wheel_speed must be > 0"),
    ({"chassis": "tank"}, "chassis must be one of"),
])
def test_time_route_errors(kw, match):
    args = {"chassis": "differential", "rate": 100.0, **kw}
    with pytest.raises(PlanError, match=match):
        time_route(_route(), **args)
