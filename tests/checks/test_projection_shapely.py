"""Projection onto the path against shapely's distance.

Reference: shapely 2.x ``LineString.distance`` (GEOS), the Euclidean distance from a point
to a polyline. On paths that do not come back near themselves the windowed projection must
give the same cross-track distance (sign aside).
"""

from __future__ import annotations

import numpy as np
import pytest
from shapely.geometry import LineString, Point

from planners.plan import project
from planners.routes import Route, Waypoint
from planners.timing import time_route

ROUTE = Route(start=(0.0, 0.0, 0.0), max_speed=1.0, max_accel=1.0, waypoints=(
    Waypoint(at=(2.0, 0.3)), Waypoint(at=(3.5, 1.5)), Waypoint(at=(3.0, 3.0)),
    Waypoint(at=(5.0, 4.0))))


@pytest.fixture(scope="module")
def plan():
    return time_route(ROUTE, chassis="differential", rate=50.0)


def test_global_window_matches_shapely(plan):
    rng = np.random.default_rng(7)
    s0 = rng.uniform(0.0, plan.length, 400)
    base = np.column_stack([np.interp(s0, plan.path_s, plan.path_x),
                            np.interp(s0, plan.path_s, plan.path_y)])
    pts = base + rng.normal(scale=0.15, size=base.shape)
    _, d = project(plan, pts, np.zeros(len(pts)), back=1.0, ahead=1e9)
    line = LineString(np.column_stack([plan.path_x, plan.path_y]))
    # shapely 2.x LineString.distance: Euclidean point-to-polyline distance
    ref = np.array([line.distance(Point(p)) for p in pts])
    assert np.allclose(np.abs(d), ref, atol=1e-12)


def test_moving_window_matches_shapely_along_a_drive(plan):
    rng = np.random.default_rng(8)
    s_true = np.linspace(0.0, plan.length, 300)
    x, y = np.interp(s_true, plan.path_s, plan.path_x), np.interp(s_true, plan.path_s, plan.path_y)
    pts = np.column_stack([x, y]) + rng.normal(scale=0.05, size=(300, 2))
    line = LineString(np.column_stack([plan.path_x, plan.path_y]))
    s_prev = np.zeros(1)
    for p in pts:  # noise of 5 cm: the nearest point stays well inside a +-0.5 m window
        s_prev, d = project(plan, p[None, :], s_prev, back=0.5, ahead=0.5)
        assert abs(d[0]) == pytest.approx(line.distance(Point(p)), abs=1e-12)


def test_sign_is_positive_left_of_travel(plan):
    # the first leg heads roughly +x: a point above it lies to the left
    _, d = project(plan, np.array([[1.0, 0.5], [1.0, -0.5]]), np.array([1.0, 1.0]))
    assert d[0] > 0.0 > d[1]


def test_polyline_is_close_to_the_true_curve(plan):
    # the stored 5 mm polyline differs from the spline by its chord sag only, so distances
    # to a dense (0.5 mm) sampling of the spline agree to well under a millimetre
    from planners.routes import route_path

    path = route_path(ROUTE, chassis="differential").path
    fine = path.evaluate(path.grid(0.0005)).xy
    rng = np.random.default_rng(9)
    pts = rng.uniform([0, -0.5], [5, 4.5], size=(50, 2))
    _, d = project(plan, pts, np.zeros(50), back=1.0, ahead=1e9)
    ref = np.array([LineString(fine).distance(Point(p)) for p in pts])
    assert np.allclose(np.abs(d), ref, atol=2e-5)
