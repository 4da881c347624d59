"""Pure pursuit curvature against Coulter's formula.

Source for every check here: R. Craig Coulter, *Implementation of the Pure Pursuit Path
Tracking Algorithm*, Carnegie Mellon University Robotics Institute, CMU-RI-TR-92-01 (1992),
the derivation of the pursuit arc: curvature = 2 x / l^2, with x the goal point's lateral
offset in the vehicle frame and l its distance (Coulter's vehicle frame has y forward; ours
has x forward, so his x is our y).
"""

from __future__ import annotations

import numpy as np
import pytest

from planners import se2
from planners.trackers import make_tracker
from planners.trackers.pure_pursuit import pursuit_curvature
from tests.planners.plan_fixtures import line_plan

# goal (x forward, y left) in the robot frame -> 2 y / (x^2 + y^2), hand-computed
CASES = [
    ((1.0, 0.0), 0.0),
    ((1.0, 1.0), 1.0),
    ((0.0, 1.0), 2.0),
    ((0.0, -0.5), -4.0),
    ((-1.0, 1.0), 1.0),
    ((3.0, 4.0), 8.0 / 25.0),
    ((0.3, -0.1), -2.0),
    ((0.28, 0.1), 0.2 / 0.0884),
]


@pytest.mark.parametrize(("goal", "kappa"), CASES, ids=[str(c[0]) for c in CASES])
def test_curvature_table(goal, kappa):
    # Coulter 1992, curvature = 2 x / l^2
    assert pursuit_curvature(np.array([goal]))[0] == pytest.approx(kappa, rel=1e-14, abs=1e-15)


def test_arc_passes_through_the_goal():
    # Coulter 1992, the arc is tangent to the heading at the vehicle and passes through the
    # goal: driving the arc for its length along the chord angle lands on the goal
    rng = np.random.default_rng(3)
    goals = rng.uniform([0.05, -1.0], [2.0, 1.0], size=(20, 2))
    kappa = pursuit_curvature(goals)
    # tangent-chord angle: the chord to a point an arc length a along is at kappa a / 2
    arc = 2.0 * np.arctan2(goals[:, 1], goals[:, 0]) / kappa
    end = se2.exp(np.column_stack([arc, np.zeros(20), kappa * arc]))
    np.testing.assert_allclose(end[:, :2], goals, atol=1e-12)


@pytest.mark.parametrize(("offset", "lookahead"), [(-0.1, 0.3), (0.05, 0.5), (0.2, 0.25)])
def test_tracker_steers_on_the_coulter_arc(offset, lookahead):
    # robot beside a straight path along +x at x = 1: the goal is where the circle of radius
    # L meets the path, at (1 + sqrt(L^2 - y^2), 0); curvature 2 (-y) / L^2 (Coulter 1992)
    plan = line_plan(speed=0.5, length=3.0)
    tracker = make_tracker(
        "pure-pursuit", chassis="differential", lookahead=lookahead, along_track_gain=0.0
    )
    tracker.reset(plan, 1)
    pose = np.array([[1.0, offset, 0.0]])
    for k in range(200):  # walk the projection to x = 1 as the robot would arrive there
        tracker.command(k * plan.dt, np.array([[k / 199, offset, 0.0]]), np.zeros((1, 3)))
    cmd = tracker.command(200 * plan.dt, pose, np.zeros((1, 3)))
    goal_x = 1.0 + np.sqrt(lookahead**2 - offset**2)
    np.testing.assert_allclose(cmd.target, [[goal_x, 0.0]], atol=1e-12)
    assert cmd.velocity[0, 0] == pytest.approx(0.5)
    assert cmd.velocity[0, 2] / cmd.velocity[0, 0] == pytest.approx(
        -2 * offset / lookahead**2, rel=1e-12
    )
