"""Scorecards: exact figures for known trajectories."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from shapely.geometry import LineString

from sim.scoring import SCORE_KEYS, ScoreKeeper
from tests.planners.plan_fixtures import circle_plan, line_plan


def _score(plan, poses, estimates=None):
    n = poses.shape[1]
    keeper = ScoreKeeper(plan, n, len(poses))
    est = poses if estimates is None else estimates
    for k, pose in enumerate(poses):
        keeper.update(k, k * plan.dt, np.ones(n, bool), pose, est[k], None,
                      np.zeros((n, 4)), np.zeros((n, 4)), np.full(n, 12.0))
    z = np.zeros(n)
    return keeper.scorecards(
        status=["completed"] * n, status_time=np.full(n, plan.duration), cause=[""] * n,
        final_true=poses[-1], final_estimate=est[-1], collisions=z.astype(int), penetration=z,
        slip_energy=z, odometry_final=None,
    )


def test_truth_replayed_scores_zero():
    plan = circle_plan(radius=1.0, speed=0.5)
    poses = plan.pose[:, None, :]
    card = _score(plan, poses)[0]
    assert card["cross_track_max_m"] == pytest.approx(0.0, abs=1e-6)
    assert card["end_position_error_m"] == 0.0
    assert card["heading_rms_rad"] == pytest.approx(0.0, abs=1e-12)
    assert card["estimate_error_rms_m"] == 0.0
    assert set(SCORE_KEYS) <= set(card)


def test_cross_track_on_a_straight_is_the_offset():
    plan = line_plan(length=3.0)
    poses = plan.pose[:, None, :].copy()
    poses[:, 0, 1] += 0.07  # 7 cm to the left of travel all the way
    card = _score(plan, poses)[0]
    assert card["cross_track_rms_m"] == pytest.approx(0.07, abs=1e-12)
    assert card["cross_track_max_m"] == pytest.approx(0.07, abs=1e-12)


def test_cross_track_on_a_curve_equals_shapely_distance():
    # Reference library: shapely 2 distance from a point to the path's LineString (<= 1 mm).
    plan = circle_plan(radius=1.2, speed=0.5, turns=0.75)
    line = LineString(np.column_stack([plan.path_x, plan.path_y]))
    poses = plan.pose[:, None, :].copy()
    off = 0.05 * np.sin(np.arange(len(poses)) / 40.0)  # wander to either side of the path
    poses[:, 0, 0] += -np.sin(poses[:, 0, 2]) * off
    poses[:, 0, 1] += np.cos(poses[:, 0, 2]) * off
    keeper = ScoreKeeper(plan, 1, len(poses))
    worst = 0.0
    for k, pose in enumerate(poses):
        keeper.update(k, k * plan.dt, np.ones(1, bool), pose, pose, None, np.zeros((1, 4)),
                      np.zeros((1, 4)), np.full(1, 12.0))
        ref = shapely.distance(line, shapely.points(pose[0, 0], pose[0, 1]))
        worst = max(worst, abs(abs(keeper.cross_track[0]) - ref))
    assert worst < 1e-3


def test_estimate_error_and_nees():
    plan = line_plan(length=2.0)
    poses = plan.pose[:, None, :]
    est = poses.copy()
    est[:, 0, 0] += 0.1
    card = _score(plan, poses, est)[0]
    assert card["estimate_error_rms_m"] == pytest.approx(0.1)
    assert card["estimate_error_max_m"] == pytest.approx(0.1)
