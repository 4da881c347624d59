"""Unit tests of planners/routes.py: heading plans, reverse legs, stops and route errors."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from planners.errors import PlanError
from planners.routes import Route, Waypoint, route_path, validate_route
from planners.se2 import wrap

SQUARE = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(2.0, 2.0), heading=np.pi / 2),
          Waypoint(at=(0.0, 2.0)), Waypoint(at=(0.0, 0.5), heading=-np.pi / 2))


def _route(**kw) -> Route:
    base = {"start": (0.0, 0.0, 0.0), "max_speed": 1.0, "max_accel": 1.0, "waypoints": SQUARE}
    return Route(**{**base, **kw})


def test_tangent_heading_follows_travel_and_its_rate_is_curvature():
    rp = route_path(_route(), chassis="differential")
    s = np.linspace(0.0, rp.path.length, 500)
    smp = rp.evaluate(s)
    assert np.allclose(wrap(smp.heading - smp.geometry.direction), 0.0, atol=1e-12)
    assert np.allclose(smp.heading_rate, smp.geometry.curvature)
    # a waypoint heading fixes the path's direction there
    assert rp.evaluate(rp.knot_s[2:3]).heading[0] == pytest.approx(np.pi / 2, abs=1e-9)


def test_reverse_leg_faces_away_from_travel_and_heading_stays_continuous():
    wps = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(1.0, 0.8), reverse=True))
    rp = route_path(_route(waypoints=wps), chassis="skid")
    assert rp.reverse.tolist() == [False, True]
    assert rp.path.breaks.tolist() == [False, True, False]
    s1 = rp.knot_s[1]
    before, after = rp.evaluate(np.array([s1 - 1e-9])), rp.evaluate(np.array([s1 + 1e-9]))
    assert wrap(after.heading - before.heading)[0] == pytest.approx(0.0, abs=1e-6)
    s = np.linspace(s1 + 1e-6, rp.path.length, 50)
    smp = rp.evaluate(s)
    assert np.allclose(wrap(smp.heading - smp.geometry.direction - np.pi), 0.0, atol=1e-9)
    assert rp.stops.tolist() == [0, 1, 2]


def test_hold_keeps_the_start_heading():
    wps = tuple(dataclasses.replace(w, heading=None) for w in SQUARE)
    rp = route_path(_route(heading="hold", start=(0.0, 0.0, 0.7), waypoints=wps),
                    chassis="mecanum")
    smp = rp.evaluate(np.linspace(0.0, rp.path.length, 100))
    assert np.allclose(smp.heading, 0.7) and np.allclose(smp.heading_rate, 0.0)


def test_blend_reaches_each_target_with_zero_rate():
    rp = route_path(_route(heading="blend"), chassis="mecanum")
    targets = rp.knot_s[[2, 4]]
    smp = rp.evaluate(targets)
    assert smp.heading == pytest.approx([np.pi / 2, -np.pi / 2], abs=1e-12)
    assert np.allclose(smp.heading_rate, 0.0, atol=1e-12)
    # halfway between start (0) and the first target (pi/2): the smoothstep gives pi/4,
    # with rate 1.875 * (pi/2) / span (the peak of 30 s^2 (1 - s)^2)
    mid = 0.5 * targets[0]
    h = rp.evaluate(np.array([mid]))
    assert h.heading[0] == pytest.approx(np.pi / 4, abs=1e-12)
    assert h.heading_rate[0] == pytest.approx(1.875 * (np.pi / 2) / targets[0], abs=1e-12)
    # the rate is the derivative of the heading (finite difference)
    e = 1e-6
    lo, hi = rp.evaluate(np.array([mid - e])), rp.evaluate(np.array([mid + e]))
    assert (hi.heading[0] - lo.heading[0]) / (2 * e) == pytest.approx(h.heading_rate[0], rel=1e-6)
    # targets unwrap the short way; a half turn goes counter-clockwise (wrap to (-pi, pi])
    assert rp.target_heading[-1] - rp.target_heading[-2] == pytest.approx(np.pi)


def test_blend_and_hold_make_corners_where_reverse_changes():
    wps = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(2.0, 2.0), reverse=True))
    rp = route_path(_route(heading="hold", waypoints=wps), chassis="mecanum")
    s1 = rp.knot_s[1]
    d0 = rp.evaluate(np.array([s1 - 1e-9])).geometry.direction[0]
    d1 = rp.evaluate(np.array([s1])).geometry.direction[0]
    assert d0 == pytest.approx(0.0, abs=1e-6) and d1 == pytest.approx(np.pi / 2, abs=1e-6)


def test_stops_include_dwells():
    wps = (Waypoint(at=(1.0, 0.0), dwell=1.5), Waypoint(at=(2.0, 0.5)))
    rp = route_path(_route(waypoints=wps), chassis="differential")
    assert rp.stops.tolist() == [0, 1, 2] and rp.dwell.tolist() == [0.0, 1.5, 0.0]


@pytest.mark.parametrize("chassis, kw, match", [
    ("mecanm", {}, "chassis must be one of .*got 'mecanm'; did you mean mecanum"),
    ("skid", {"heading": "hold"}, "heading must be 'tangent' for a skid chassis"),
    ("mecanum", {"heading": "blnd"}, "did you mean blend"),
    ("mecanum", {"max_speed": 0.0}, "max_speed must be > 0, got 0.0"),
    ("mecanum", {"max_decel": -1.0}, "max_decel must be > 0"),
    ("mecanum", {"max_jerk": float("inf")}, "max_jerk must be > 0"),
    ("mecanum", {"wheel_speed_margin": 1.5}, "wheel_speed_margin must be > 0 and <= 1"),
    ("mecanum", {"waypoints": ()}, "waypoint must list at least 1 point"),
    ("mecanum", {"waypoints": (Waypoint(at=(1.0, 0.0), speed=0.0),)},
     r"waypoint\[0\]\.speed must be > 0, got 0.0; to stop there, give a dwell"),
    ("mecanum", {"waypoints": (Waypoint(at=(1.0, 0.0), dwell=-1.0),)},
     r"waypoint\[0\]\.dwell must be >= 0"),
    ("mecanum", {"heading": "hold"}, r"waypoint\[1\]\.heading needs route\.heading 'blend'"),
    ("mecanum", {"start": (0.0, float("nan"), 0.0)}, "start must be finite"),
])
def test_route_errors(chassis, kw, match):
    with pytest.raises(PlanError, match=match):
        validate_route(_route(**kw), chassis=chassis)


def test_cusp_without_reverse_is_refused():
    wps = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(1.0, 0.0)))
    with pytest.raises(PlanError, match=r"waypoint\[0\] must not turn the path back on itself.*"
                                        r"set reverse = true on waypoint\[1\]"):
        route_path(_route(waypoints=wps), chassis="differential")
    # the same route backing up is fine
    wps = (Waypoint(at=(2.0, 0.0)), Waypoint(at=(1.0, 0.0), reverse=True))
    rp = route_path(_route(waypoints=wps), chassis="differential")
    assert rp.path.length == pytest.approx(3.0, abs=1e-9)


def test_first_waypoint_behind_the_start_needs_reverse():
    wps = (Waypoint(at=(-2.0, 0.1)),)
    with pytest.raises(PlanError, match=r"waypoint\[0\] must lie ahead of the start heading, got "
                                        "it 177 deg off; set reverse = true"):
        route_path(_route(waypoints=wps), chassis="differential")
    wps = (Waypoint(at=(-2.0, 0.1), reverse=True),)
    rp = route_path(_route(waypoints=wps), chassis="differential")
    assert rp.evaluate(np.zeros(1)).heading[0] == pytest.approx(0.0, abs=1e-12)


def test_waypoint_on_the_start_is_refused():
    with pytest.raises(PlanError, match=r"waypoint\[0\] must differ from the start"):
        route_path(_route(waypoints=(Waypoint(at=(0.0, 0.0)),)), chassis="mecanum")


def test_close_waypoints_whose_headings_loop_are_refused():
    wps = (Waypoint(at=(2.0, 0.0), heading=0.0), Waypoint(at=(1.95, 0.01), heading=0.0),
           Waypoint(at=(4.0, 0.0)))
    with pytest.raises(PlanError, match=r"waypoint\[1\] must be farther from waypoint\[0\] or the "
                                        "headings there changed, got 0.051 m apart"):
        route_path(_route(waypoints=wps), chassis="differential")
