"""Odometry: shapes, batch = loop, IMU heading, two-pod layouts, errors."""

from __future__ import annotations

import numpy as np
import pytest

from planners.errors import ScenarioError
from planners.odometry import Odometry, pod_matrix
from planners.readings import Readings
from planners.se2 import compose, exp, wrap

R, B = 0.05, 0.32
DIFF_F = R * np.array([[0.5, 0.5], [0.0, 0.0], [-1 / B, 1 / B]])  # left, right
DIFF_H = np.array([[1, 0, -B / 2], [1, 0, B / 2]]) / R
POD_AT = np.array([[0.0, 0.12], [0.0, -0.12], [-0.08, 0.0]])
POD_DIR = np.array([0.0, 0.0, np.pi / 2])
POD_R, POD_CPR = 0.024, 8192.0


def make(source: str, pods: slice = slice(None), **kw) -> Odometry:
    if source.startswith("encoders"):
        return Odometry(source=source, forward=DIFF_F, counts_per_rev=2 * np.pi, **kw)
    return Odometry(source=source, pod_at=POD_AT[pods], pod_direction=POD_DIR[pods],
                    pod_radius=POD_R, pod_counts_per_rev=POD_CPR, **kw)


def exact_readings(twist: np.ndarray, pose0: np.ndarray, ticks: int, dt: float = 0.01,
                   imu_every: int = 1, pods: slice = slice(None)):
    """Noise-free readings of robots moving with constant body twists (N, 3)."""
    a = pod_matrix(POD_AT[pods], POD_DIR[pods])
    out, truth = [], []
    for k in range(ticks + 1):
        t = k * dt
        valid = np.full(twist.shape[0], k > 0 and k % imu_every == 0)
        out.append(Readings(
            t=t,
            encoder_counts=(twist * t) @ DIFF_H.T,
            pod_counts=(twist * t) @ a.T * POD_CPR / (2 * np.pi * POD_R),
            gyro_rate=np.where(valid, twist[:, 2], np.nan),
            imu_valid=valid,
            gyro_interval=np.where(valid, imu_every * dt, 0.0),
        ))
        truth.append(compose(pose0, exp(twist * t)))
    return out, truth


def run(odo: Odometry, pose0: np.ndarray, readings) -> np.ndarray:
    odo.reset(pose0)
    for r in readings:
        pose = odo.update(r)
    return pose


@pytest.mark.parametrize("source", ["encoders", "pods", "encoders+imu", "pods+imu"])
@pytest.mark.parametrize("n", [0, 1, 5])
def test_shapes_and_noise_free_recovery(source, n):
    rng = np.random.default_rng(n)
    twist = np.column_stack([rng.uniform(0.2, 1, n), np.zeros(n), rng.uniform(-2, 2, n)])
    if source.startswith("pods"):
        twist[:, 1] = rng.uniform(-0.5, 0.5, n)
    pose0 = np.column_stack([rng.uniform(0, 3, (n, 2)), rng.uniform(-3, 3, n)])
    readings, truth = exact_readings(twist, pose0, 150)
    est = run(make(source), pose0, readings)
    assert est.shape == (n, 3)
    assert est[:, :2] == pytest.approx(truth[-1][:, :2], abs=1e-10)
    assert wrap(est[:, 2] - truth[-1][:, 2]) == pytest.approx(np.zeros(n), abs=1e-10)


def test_batch_equals_one_robot_at_a_time():
    rng = np.random.default_rng(7)
    twist = np.column_stack([rng.uniform(0, 1, 5), rng.uniform(-0.3, 0.3, 5), rng.uniform(-2, 2, 5)])
    pose0 = rng.uniform(-1, 1, (5, 3))
    readings, _ = exact_readings(twist, pose0, 40)
    # a little count noise so every robot's path differs from its exact arc
    noisy = [Readings(t=r.t, pod_counts=r.pod_counts + rng.normal(0, 3, r.pod_counts.shape))
             for r in readings]
    batch = run(make("pods"), pose0, noisy)
    for i in range(5):
        one = [Readings(t=r.t, pod_counts=r.pod_counts[i:i + 1]) for r in noisy]
        np.testing.assert_array_equal(run(make("pods"), pose0[i:i + 1], one), batch[i:i + 1])


@pytest.mark.parametrize(
    "source, positions", [("encoders+imu", True), ("pods", True), ("pods", False)]
)
def test_batch_across_the_vector_width_equals_one_robot_at_a_time(source, positions):
    # 11 robots: one vectorised block of 8 and a scalar remainder; robots 2 and 9 turn
    # 0.8 rad a tick, past SERIES_MAX, so they take the libm path inside the batch
    rng = np.random.default_rng(11)
    n = 11
    twist = np.column_stack(
        [rng.uniform(0, 1, n), rng.uniform(-0.3, 0.3, n), rng.uniform(-2, 2, n)]
    )
    twist[[2, 9], 2] = [80.0, -80.0]
    pose0 = rng.uniform(-3, 3, (n, 3))
    readings, _ = exact_readings(twist, pose0, 30, imu_every=3)
    field = "encoder_counts" if source.startswith("encoders") else "pod_counts"
    counts = [getattr(r, field) + rng.normal(0, 3, getattr(r, field).shape) for r in readings]

    def last(rows: slice):
        odo = make(source, positions=positions)
        odo.reset(pose0[rows])
        for r, c in zip(readings, counts):
            odo.update(Readings(
                t=r.t, **{field: c[rows]}, gyro_rate=r.gyro_rate[rows],
                imu_valid=r.imu_valid[rows], gyro_interval=r.gyro_interval[rows],
            ))
        return odo.pose, odo.increment.copy()

    batch = last(slice(None))
    for i in range(n):
        one = last(slice(i, i + 1))
        np.testing.assert_array_equal(one[0], batch[0][i:i + 1])
        np.testing.assert_array_equal(one[1], batch[1][i:i + 1])


def test_imu_heading_replaces_a_wrong_encoder_heading():
    # encoders believe a 10 % narrower track (heading too fast); the gyro knows better
    wrong = Odometry(source="encoders+imu", forward=DIFF_F * [[1], [1], [1.1]], counts_per_rev=2 * np.pi)
    twist = np.array([[0.6, 0.0, 1.2]])
    readings, truth = exact_readings(twist, np.zeros((1, 3)), 200)
    est = run(wrong, np.zeros((1, 3)), readings)
    assert est[0] == pytest.approx(truth[-1][0], abs=1e-10)
    plain = Odometry(source="encoders", forward=DIFF_F * [[1], [1], [1.1]], counts_per_rev=2 * np.pi)
    assert abs(wrap(run(plain, np.zeros((1, 3)), readings)[0, 2] - truth[-1][0, 2])) > 0.2


def test_slow_imu_is_filled_in_between_and_exact_at_samples():
    twist = np.array([[0.6, 0.0, 1.2]])
    readings, truth = exact_readings(twist, np.zeros((1, 3)), 200, imu_every=4)
    # encoders with the wrong track drift between gyro samples, and are pulled back at each
    wrong = Odometry(source="encoders+imu", forward=DIFF_F * [[1], [1], [1.05]], counts_per_rev=2 * np.pi)
    wrong.reset(np.zeros((1, 3)))
    for k, r in enumerate(readings):
        est = wrong.update(r)
        if k % 4 == 0:
            assert wrap(est[0, 2] - truth[k][0, 2]) == pytest.approx(0.0, abs=1e-10)
        elif k > 0:
            assert abs(wrap(est[0, 2] - truth[k][0, 2])) > 1e-5


def test_two_pods_with_imu_and_two_pods_without_sideslip():
    two = slice(0, 2)  # the two forward pods, no sideways pod
    twist = np.array([[0.7, 0.2, -0.9]])
    readings, truth = exact_readings(twist, np.zeros((1, 3)), 100, pods=slice(1, 3))
    odo = Odometry(source="pods+imu", pod_at=POD_AT[1:3], pod_direction=POD_DIR[1:3],
                   pod_radius=POD_R, pod_counts_per_rev=POD_CPR)
    assert run(odo, np.zeros((1, 3)), readings)[0] == pytest.approx(truth[-1][0], abs=1e-10)
    diff_twist = np.array([[0.7, 0.0, -0.9]])
    readings, truth = exact_readings(diff_twist, np.zeros((1, 3)), 100, pods=two)
    est = run(make("pods", two, no_sideslip=True), np.zeros((1, 3)), readings)
    assert est[0] == pytest.approx(truth[-1][0], abs=1e-10)


def test_two_pods_with_imu_hold_the_last_rate_between_samples():
    twist = np.array([[0.7, 0.2, -0.9]])
    readings, truth = exact_readings(twist, np.zeros((1, 3)), 100, imu_every=5, pods=slice(1, 3))
    odo = Odometry(source="pods+imu", pod_at=POD_AT[1:3], pod_direction=POD_DIR[1:3],
                   pod_radius=POD_R, pod_counts_per_rev=POD_CPR)
    # the first gyro sample comes at tick 5; from then on the held rate is the true one
    assert run(odo, np.zeros((1, 3)), readings)[0, 2] == pytest.approx(truth[-1][0, 2], abs=1e-10)


def test_errors():
    with pytest.raises(ScenarioError, match=r"odometry: source must be one of .*; did you mean pods\?"):
        Odometry(source="pod")
    with pytest.raises(ScenarioError, match="odometry: forward and counts_per_rev must be given"):
        Odometry(source="encoders")
    with pytest.raises(ScenarioError, match=r"odometry: forward must have shape \(3, W\)"):
        Odometry(source="encoders", forward=np.zeros((2, 2)), counts_per_rev=100)
    with pytest.raises(ScenarioError, match="odometry: pod_at, pod_direction, pod_radius"):
        Odometry(source="pods", pod_at=POD_AT)
    with pytest.raises(ScenarioError, match="odometry: pods must be at least three"):
        make("pods", slice(0, 2))
    odo = make("encoders+imu")
    odo.reset(np.zeros((1, 3)))
    with pytest.raises(ScenarioError, match="odometry: readings.encoder_counts must be present"):
        odo.update(Readings(t=0.0))
    odo.update(Readings(t=0.0, encoder_counts=np.zeros((1, 2))))
    with pytest.raises(ScenarioError, match="odometry: readings.gyro_rate must be present"):
        odo.update(Readings(t=0.01, encoder_counts=np.zeros((1, 2))))
    with pytest.raises(ValueError, match=r"odometry: readings.encoder_counts must have shape \(1, 2\)"):
        odo.update(Readings(t=0.01, encoder_counts=np.zeros((1, 4))))
    with pytest.raises(ValueError, match=r"odometry: pose0 must have shape \(N, 3\)"):
        odo.reset(np.zeros(3))
