"""Final alignment of the path trackers on a heading-bound chassis (turn-drive-turn)."""

from __future__ import annotations

import numpy as np
import pytest

from planners import se2
from planners.trackers import TRACKERS
from planners.trackers.base import SETTLE_DEADBAND, BodyCommand, settle
from tests.planners.plan_fixtures import line_plan


def drive(pose: np.ndarray, plan, t0: float, seconds: float, dt: float = 0.005) -> np.ndarray:
    """An ideal differential robot (no side slip) under the alignment alone."""
    for k in range(int(seconds / dt)):
        zero = BodyCommand(velocity=np.zeros((len(pose), 3)), accel=np.zeros((len(pose), 3)))
        cmd = settle(zero, t0 + k * dt, plan, pose, radius=0.1, gain=2.0)
        assert np.all(cmd.velocity[:, 1] == 0.0)
        pose = se2.compose(pose, se2.exp(cmd.velocity * dt))
    return pose


@pytest.mark.parametrize(
    "offset",
    [(0.0, 0.04, 0.15), (-0.05, -0.03, -0.1), (0.06, 0.0, 0.3), (0.0, 0.0, -0.2)],
    ids=["beside", "behind-right", "overshot", "heading-only"],
)
def test_reaches_the_end_pose(offset):
    plan = line_plan()
    goal = plan.final_pose[0]
    start = (goal + np.array(offset))[None, :]
    end = drive(start, plan, plan.duration, 20.0)
    assert np.hypot(*(end[0, :2] - goal[:2])) <= SETTLE_DEADBAND + 1e-3
    assert abs(se2.wrap(end[0, 2] - goal[2])) < np.radians(0.5)


def test_only_after_the_plan_and_near_the_end():
    plan = line_plan()
    goal = plan.final_pose[0]
    cmd = BodyCommand(velocity=np.full((2, 3), 0.3), accel=np.full((2, 3), 0.1))
    pose = np.array([goal + [0.0, 0.05, 0.1], goal + [-0.5, 0.0, 0.0]])
    before = settle(cmd, plan.duration - 0.01, plan, pose, radius=0.1, gain=2.0)
    assert before is cmd
    after = settle(cmd, plan.duration, plan, pose, radius=0.1, gain=2.0)
    np.testing.assert_array_equal(after.velocity[1], cmd.velocity[1])  # 0.5 m away: untouched
    assert after.velocity[0, 2] > 0.0  # turns left toward the point beside it
    np.testing.assert_array_equal(after.accel[0], 0.0)
    off = settle(cmd, plan.duration, plan, pose, radius=0.0, gain=2.0)
    assert off is cmd


@pytest.mark.parametrize("name", ["pure-pursuit", "stanley", "unicycle"])
def test_path_trackers_declare_the_keys(name):
    params = TRACKERS.get(name).PARAMS
    assert params["settle_radius"].default == pytest.approx(0.1)
    assert params["settle_gain"].default == pytest.approx(2.0)
