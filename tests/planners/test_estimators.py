"""Estimator specifics: missing sensors give ScenarioError; noise-free cases match the truth."""

from __future__ import annotations

import numpy as np
import pytest

from planners.errors import ScenarioError
from planners.estimators import ESTIMATORS
from tests.planners.test_estimator_fixtures import context, drive


def test_odometry_needs_encoders() -> None:
    ctx = context()
    ctx["sensors"].encoders = None
    with pytest.raises(ScenarioError, match="estimator.odometry: sensors.encoders must be present"):
        ESTIMATORS.get("odometry")(**ctx)


def test_odometry_needs_pods() -> None:
    with pytest.raises(ScenarioError, match="estimator.odometry: sensors.pods must be present"):
        ESTIMATORS.get("odometry")(source="pods", **context())


def test_odometry_imu_source_needs_imu() -> None:
    with pytest.raises(ScenarioError, match="estimator.ekf: sensors.imu must be present"):
        ESTIMATORS.get("ekf")(source="encoders+imu", **context(imu=False))


@pytest.mark.parametrize("name", ["kalman", "complementary"])
def test_gyro_filters_need_imu(name: str) -> None:
    with pytest.raises(ScenarioError, match=f"estimator.{name}: sensors.imu must be present"):
        ESTIMATORS.get(name)(**context(imu=False))


@pytest.mark.parametrize("name", ["kalman", "lowpass", "luenberger", "particle"])
def test_fix_filters_need_fixes(name: str) -> None:
    with pytest.raises(ScenarioError, match=f"estimator.{name}: sensors.fixes must be present"):
        ESTIMATORS.get(name)(**context(fixes=False))


def test_kalman_on_odometry_heading_needs_no_fixes() -> None:
    est = ESTIMATORS.get("kalman")(measure="odometry", **context(fixes=False))
    truth, readings = drive(2, 50, np.random.default_rng(4))
    est.reset(truth[0], 2)
    out = np.array([est.update(r.t, r) for r in readings])
    assert np.abs(out[:, :, 2] - truth[:, :, 2]).max() < 0.01


def test_odometry_estimator_matches_truth_within_quantisation() -> None:
    est = ESTIMATORS.get("odometry")(**context())
    truth, readings = drive(3, 400, np.random.default_rng(5))
    est.reset(truth[0], 3)
    out = np.array([est.update(r.t, r) for r in readings])
    # 2048 counts per rev on 0.05 m wheels: 0.15 mm per count, drift of a few counts over 2 s
    assert np.abs(out[:, :, :2] - truth[:, :, :2]).max() < 2e-3


def test_ekf_rejects_outlier_fix() -> None:
    est = ESTIMATORS.get("ekf")(**context())
    truth, readings = drive(1, 40, np.random.default_rng(6), latency_ticks=0)
    readings[20].fix = readings[20].fix + np.array([[1.0, 0.0, 0.0]])  # 1 m off: 50 sigma
    est.reset(truth[0], 1)
    out = np.array([est.update(r.t, r) for r in readings])
    assert est.rejected[0] == 1
    assert np.abs(out[:, 0, :2] - truth[:, 0, :2]).max() < 0.02


def test_ekf_reacquires_after_rejections_in_a_row() -> None:
    est = ESTIMATORS.get("ekf")(reacquire=5, **context())
    truth, readings = drive(1, 200, np.random.default_rng(7), latency_ticks=0)
    for r in readings[60:]:
        r.fix = r.fix + np.array([[0.5, 0.0, 0.0]])  # the robot was carried 0.5 m (a slip)
    est.reset(truth[0], 1)
    out = np.array([est.update(r.t, r) for r in readings])
    # fixes at ticks 60, 80, ..., 140 are rejected (5 in a row); the one at 160 is taken
    assert est.rejected[0] == 5
    assert abs(out[159, 0, 0] - truth[159, 0, 0]) < 0.02
    assert abs(out[160, 0, 0] - truth[160, 0, 0] - 0.5) < 0.05


def test_particle_needs_rngs() -> None:
    est = ESTIMATORS.get("particle")(**context())
    with pytest.raises(ValueError, match="estimator.particle: rngs must be 2 numpy Generators"):
        est.reset(np.zeros((2, 3)), 2)


def test_particle_follows_fixes() -> None:
    est = ESTIMATORS.get("particle")(particles=300, **context())
    truth, readings = drive(2, 600, np.random.default_rng(8), latency_ticks=0)
    est.reset(truth[0], 2, rngs=[np.random.default_rng([8, k]) for k in range(2)])
    out = np.array([est.update(r.t, r) for r in readings])
    err = np.linalg.norm(out[:, :, :2] - truth[:, :, :2], axis=2)
    assert err.max() < 0.05
    assert np.all(np.linalg.eigvalsh(est.covariance) > 0.0)


def test_params_are_checked_with_a_suggestion() -> None:
    with pytest.raises(ScenarioError, match="estimator.kalman: mode must be one of .*did you mean steady"):
        ESTIMATORS.get("kalman")(mode="stedy", **context())
    with pytest.raises(ScenarioError, match="estimator.ekf: gait must be one of .*did you mean gate"):
        ESTIMATORS.get("ekf")(gait=3.0, **context())


def test_ekf_ranges_need_range_sensors_and_walls() -> None:
    with pytest.raises(ScenarioError, match=r"estimator.ekf: ranges needs \[\[sensors.range\]\] on the robot, got none"):
        ESTIMATORS.get("ekf")(ranges=True, **context())
    ctx = context(ranges=True)
    ctx["field"].segments = np.zeros((0, 4))
    with pytest.raises(ScenarioError, match="estimator.ekf: ranges needs a field with walls, got 0 wall segments"):
        ESTIMATORS.get("ekf")(ranges=True, **ctx)


def test_particle_runs_on_range_sensors_without_fixes() -> None:
    est = ESTIMATORS.get("particle")(particles=100, **context(fixes=False, ranges=True))
    assert est.beams is not None and est.beams.count == 3
    with pytest.raises(ScenarioError, match="estimator.particle: init must be 'start' on a field without walls"):
        ESTIMATORS.get("particle")(init="uniform", **context())


def test_constant_velocity_model_takes_fixes_only() -> None:
    with pytest.raises(ScenarioError, match="estimator.kalman: measure must be 'fixes' with model 'constant-velocity', got 'both'"):
        ESTIMATORS.get("kalman")(model="constant-velocity", measure="both", **context())
    with pytest.raises(ScenarioError, match="estimator.kalman: sensors.fixes must be present"):
        ESTIMATORS.get("kalman")(model="constant-velocity", **context(fixes=False))
    # no IMU needed: it tracks the fixes alone
    ESTIMATORS.get("kalman")(model="constant-velocity", **context(imu=False))
