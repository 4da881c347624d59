"""Curvature of the quintic Hermite path against a circle, and its continuity at joints.

Reference: a circle of radius R has curvature 1/R everywhere (elementary differential
geometry, e.g. do Carmo, *Differential Geometry of Curves and Surfaces*, 1976, §1-5); the
tolerance of 5% on the inner legs is the issue's. Continuity: the quintic Hermite segments
share first and second derivatives' curvature at every joint by construction, checked here
numerically (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from planners.paths import spline_path
from planners.routes import Route, Waypoint, route_path


@pytest.mark.parametrize("radius", [0.5, 1.5, 4.0])
def test_circle_through_eight_waypoints_has_curvature_one_over_r(radius):
    theta = np.linspace(0.0, 2.0 * np.pi * 7.0 / 8.0, 8)
    pts = radius * np.column_stack([np.cos(theta), np.sin(theta)])
    path = spline_path(pts, directions=theta + np.pi / 2)  # the circle's tangent headings
    inner = np.concatenate([np.linspace(path.knot_s[i], path.knot_s[i + 1], 200)
                            for i in range(1, 6)])  # legs not touching the ends
    kappa = path.evaluate(inner).curvature
    # do Carmo 1976 §1-5: curvature of a circle = 1 / R; issue tolerance 5%
    assert np.all(np.abs(kappa * radius - 1.0) < 0.05)
    # and the points stay on the circle (length of the arc is R * angle)
    assert path.length == pytest.approx(radius * theta[-1], rel=1e-3)


def _joint_jumps(path, eps=1e-7):
    joints = path.knot_s[1:-1][~path.breaks[1:-1]]
    before = path.evaluate(joints - eps)
    after = path.evaluate(joints + eps)
    # allowed: what the curvature changes over 2 eps inside a leg (sampling error)
    slack = 2 * eps * np.maximum(np.abs(before.curvature_rate), np.abs(after.curvature_rate))
    return (np.abs(after.curvature - before.curvature) - slack,
            np.abs(np.angle(np.exp(1j * (after.direction - before.direction)))))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_curvature_continuous_at_every_joint(seed):
    rng = np.random.default_rng(seed)
    pts = np.cumsum(rng.uniform(0.4, 1.2, size=(10, 2)) * rng.choice([-1, 1], size=(10, 2))
                    * [[1.0, 0.6]] + [[1.0, 0.0]], axis=0)
    path = spline_path(pts)
    dk, dphi = _joint_jumps(path)
    assert np.all(dk < 1e-6)
    assert np.all(dphi < 1e-6)


def test_curvature_continuous_with_given_headings_and_straight_legs():
    route = Route(start=(0.0, 0.0, 0.0), max_speed=1.0, max_accel=1.0, waypoints=(
        Waypoint(at=(2.0, 0.0)), Waypoint(at=(3.0, 0.0), heading=0.0),  # straight run
        Waypoint(at=(4.0, 1.0), heading=np.pi / 2), Waypoint(at=(3.0, 2.5)),
        Waypoint(at=(1.0, 2.0), heading=np.pi)))
    path = route_path(route, chassis="differential").path
    dk, dphi = _joint_jumps(path)
    assert np.all(dk < 1e-6) and np.all(dphi < 1e-6)
    s = np.linspace(0.0, path.knot_s[2], 300)
    assert np.allclose(path.evaluate(s).curvature, 0.0, atol=1e-9)  # the straight legs
