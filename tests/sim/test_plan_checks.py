"""sim/plan_checks.py: the smoothed path, not only the waypoints, must clear the field."""

from __future__ import annotations

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from planners.errors import PlanError
from planners.routes import Route, Waypoint
from planners.timing import time_route
from sim.plan_checks import check_plan_clearance, path_clearance

FLOOR = Polygon([(0, 0), (4, 0), (4, 3), (0, 3)])


def _plan(*wps, start=(0.5, 0.5, 0.0)):
    route = Route(start=start, max_speed=1.0, max_accel=1.0, waypoints=wps)
    return time_route(route, chassis="differential", rate=50.0)


def test_clear_path_passes_and_clearance_matches_shapely():
    plan = _plan(Waypoint(at=(2.0, 0.8)), Waypoint(at=(3.3, 1.5)))
    check_plan_clearance(plan, FLOOR, half_width=0.2)
    c = path_clearance(plan, FLOOR)
    k = len(c) // 2
    p = Point(plan.path_x[k], plan.path_y[k])
    assert c[k] == pytest.approx(FLOOR.exterior.distance(p), abs=1e-12)  # shapely reference


def test_smoothing_that_swings_out_of_the_field_is_named():
    # every waypoint is 0.3 m inside the wall, but the curve through them bulges past it
    plan = _plan(Waypoint(at=(3.7, 0.3)), Waypoint(at=(3.7, 2.7)), Waypoint(at=(0.3, 2.7)),
                 start=(0.3, 0.3, 0.0))
    xy = np.array([[0.3, 0.3], [3.7, 0.3], [3.7, 2.7], [0.3, 2.7]])
    assert (path_clearance(plan, FLOOR) < 0).any()
    assert all(FLOOR.exterior.distance(Point(p)) >= 0.3 - 1e-12 for p in xy)
    with pytest.raises(PlanError, match=r"smoothed path must keep 0\.200 m .* leaves the free "
                                        r"space by .* between (the start|waypoint\[\d\]) and"):
        check_plan_clearance(plan, FLOOR, half_width=0.2)


def test_obstacle_too_close_is_refused():
    space = FLOOR.difference(Polygon([(1.8, 0.9), (2.2, 0.9), (2.2, 1.3), (1.8, 1.3)]))
    plan = _plan(Waypoint(at=(3.5, 0.7)))
    with pytest.raises(PlanError, match=r"comes within 0\.335 m of the edge"):
        check_plan_clearance(plan, space, half_width=0.4)
    check_plan_clearance(plan, space, half_width=0.3)
