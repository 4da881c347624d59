"""Compiled path look-ups of the geometric trackers against brute force."""

from __future__ import annotations

import numpy as np
import pytest

from planners.plan import path_state
from planners.trackers.geometry import circle_crossing, path_curvature, path_point
from tests.planners.plan_fixtures import circle_plan, figure_eight_plan

PLAN = figure_eight_plan()


def test_path_point_matches_path_state():
    s = np.linspace(-0.1, PLAN.length + 0.1, 57)
    x, y, h = path_state(PLAN, s)
    for i, si in enumerate(s):
        px, py, ph = path_point(PLAN.path_s, PLAN.path_x, PLAN.path_y, PLAN.path_heading, si)
        assert (px, py) == pytest.approx((x[i], y[i]), abs=1e-12)
        assert np.cos(ph - h[i]) == pytest.approx(1.0, abs=1e-12)


def _brute_crossing(plan, s0, q, radius):
    # densely resampled path from s0 on: the first sample at or beyond the radius
    s = np.linspace(s0, plan.length, 400_001)
    x, y, _ = path_state(plan, s)
    d = np.hypot(x - q[0], y - q[1])
    beyond = np.nonzero(d >= radius)[0]
    j = beyond[0] if beyond.size else -1
    return np.array([x[j], y[j]])


@pytest.mark.parametrize("seed", range(6))
def test_circle_crossing_matches_brute_force(seed):
    rng = np.random.default_rng(seed)
    s0 = rng.uniform(0.0, PLAN.length * 0.8)
    x, y, _ = path_state(PLAN, np.array([s0]))
    q = np.array([x[0], y[0]]) + rng.normal(0.0, 0.05, 2)
    radius = rng.uniform(0.1, 0.6)
    got = circle_crossing(
        PLAN.path_s, PLAN.path_x, PLAN.path_y, PLAN.path_heading[-1], s0, q[0], q[1], radius
    )
    np.testing.assert_allclose(got, _brute_crossing(PLAN, s0, q, radius), atol=2e-5)
    assert np.hypot(got[0] - q[0], got[1] - q[1]) == pytest.approx(radius, abs=1e-9)


def test_circle_crossing_edge_cases():
    ps, px, py, h_end = PLAN.path_s, PLAN.path_x, PLAN.path_y, PLAN.path_heading[-1]
    # the start point is already outside: it is the goal
    got = circle_crossing(ps, px, py, h_end, 1.0, 5.0, 5.0, 0.3)
    expected = path_state(PLAN, np.array([1.0]))
    assert got == pytest.approx((expected[0][0], expected[1][0]), abs=1e-12)
    # the path ends inside the circle: the crossing of the ray along the final direction
    q = (px[-1] - 0.02, py[-1] + 0.01)
    got = np.array(circle_crossing(ps, px, py, h_end, PLAN.length - 0.05, q[0], q[1], 0.3))
    along = np.array([np.cos(h_end), np.sin(h_end)])
    rel = got - np.array([px[-1], py[-1]])
    assert along[0] * rel[1] - along[1] * rel[0] == pytest.approx(0.0, abs=1e-12)  # on the ray
    assert rel @ along > 0.0
    assert np.hypot(got[0] - q[0], got[1] - q[1]) == pytest.approx(0.3, abs=1e-12)


def test_curvature_of_a_circle():
    plan = circle_plan(radius=0.8)
    np.testing.assert_allclose(path_curvature(plan), 1.0 / 0.8, rtol=1e-4)
