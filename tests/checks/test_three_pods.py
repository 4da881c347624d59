"""Three-pod odometry: the closed-form solve against least squares and a hand derivation."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg

from planners.errors import ScenarioError
from planners.odometry import Odometry, inverse_closed_form, pod_matrix, pod_twist_maps
from planners.se2 import compose, exp, wrap
from sim.config_sensors import Pod, SensorSuite
from sim.field import Field
from sim.sensors import Sensors


def test_closed_form_equals_least_squares_for_random_layouts():
    # reference: scipy.linalg.lstsq (LAPACK gelsd) on the same pod equations s = A xi
    rng = np.random.default_rng(3)
    for _ in range(50):
        at = rng.uniform(-0.2, 0.2, (3, 2))
        direction = rng.uniform(-np.pi, np.pi, 3)
        a = pod_matrix(at, direction)
        if abs(np.linalg.det(a)) < 1e-3:
            continue
        s = rng.normal(size=3)
        gain, _, own = pod_twist_maps(at, direction)
        ref = scipy.linalg.lstsq(a, s)[0]
        assert own
        assert gain @ s == pytest.approx(ref, abs=1e-10)
        assert inverse_closed_form(a) @ a == pytest.approx(np.eye(3), abs=1e-10)


def test_four_pods_are_the_least_squares_solution():
    rng = np.random.default_rng(4)
    at = np.array([[0.0, 0.15], [0.0, -0.15], [-0.1, 0.0], [0.12, 0.02]])
    direction = np.array([0.0, 0.0, np.pi / 2, 0.3])
    s = rng.normal(size=4)
    gain, _, _ = pod_twist_maps(at, direction)
    assert gain @ s == pytest.approx(scipy.linalg.lstsq(pod_matrix(at, direction), s)[0], abs=1e-12)


def test_classic_layout_matches_hand_derivation():
    # Two forward pods at y = yl > 0 and y = yr < 0, one sideways pod at x = xb (derived by
    # hand from s = u . (v + omega x p); common practice, no source):
    #   dtheta = (sr - sl) / (yl - yr),  dx = (yl sr - yr sl) / (yl - yr),  dy = sb - xb dtheta
    yl, yr, xb = 0.17, -0.13, -0.09
    at = np.array([[0.02, yl], [0.02, yr], [xb, 0.0]])
    direction = np.array([0.0, 0.0, np.pi / 2])
    sl, sr, sb = 0.031, 0.027, -0.004
    gain, _, _ = pod_twist_maps(at, direction)
    dth = (sr - sl) / (yl - yr)
    expected = [(yl * sr - yr * sl) / (yl - yr), sb - xb * dth, dth]
    assert gain @ np.array([sl, sr, sb]) == pytest.approx(expected, abs=1e-14)


def test_parallel_pods_are_rejected():
    at = np.array([[0.0, 0.1], [0.0, -0.1], [0.1, 0.0]])
    with pytest.raises(ScenarioError, match="odometry: pods must separate forward, sideways"):
        pod_twist_maps(at, np.zeros(3))


def test_three_pods_through_sensors_follow_any_motion_exactly():
    # Pods measure the arc between ticks exactly and the odometry inverts it exactly, so a
    # wandering noise-free motion is recovered to rounding (equivalence check).
    pods = (
        Pod(at=(0.05, 0.16), radius=0.024, counts_per_rev=2000, quantise=False),
        Pod(at=(0.05, -0.16), radius=0.024, counts_per_rev=2000, quantise=False),
        Pod(at=(-0.11, 0.0), direction=np.pi / 2, radius=0.024, counts_per_rev=2000, quantise=False),
    )
    box = Field(name="loading dock", boundary=np.array([[-9, -9], [9, -9], [9, 9], [-9, 9.0]]))
    dt = 0.005
    sensors = Sensors(SensorSuite(pods=pods), field=box, wheel_count=4, dt=dt)
    pose = np.array([[1.0, 2.0, -2.5], [0.0, 0.0, 3.0]])
    sensors.reset([np.random.default_rng(k) for k in range(2)], pose)
    odo = Odometry(
        source="pods",
        pod_at=np.array([p.at for p in pods]),
        pod_direction=np.array([p.direction for p in pods]),
        pod_radius=0.024,
        pod_counts_per_rev=2000,
    )
    odo.reset(pose)
    for k in range(800):
        t = k * dt
        est = odo.update(sensors.read(t, pose, np.zeros((2, 4))))
        twist = np.array([[1.2 * np.cos(t), 0.6 * np.sin(3 * t), 2.0 * np.sin(0.7 * t)]]) * dt
        pose = compose(pose, exp(np.repeat(twist, 2, axis=0) * [[1, 1, 1], [-1, 0.5, 2]]))
    est = odo.update(sensors.read(800 * dt, pose, np.zeros((2, 4))))
    assert est[:, :2] == pytest.approx(pose[:, :2], abs=1e-9)
    assert wrap(est[:, 2] - pose[:, 2]) == pytest.approx(0.0, abs=1e-9)
