"""Odometry against Lynch & Park, worked arcs, and a noise-free encoder circle."""

from __future__ import annotations

import numpy as np
import pytest

from planners.odometry import Odometry
from planners.readings import Readings
from planners.se2 import compose, exp, wrap
from sim.config_sensors import Encoders, SensorSuite
from sim.field import Field
from sim.sensors import Sensors

R, TRACK, WHEELBASE = 0.048, 0.36, 0.30
A = (WHEELBASE + TRACK) / 2


def mecanum_h(r: float = R, a: float = A) -> np.ndarray:
    # wheel speeds from body twist [vx, vy, omega], wheels FL, FR, RL, RR
    # (Lynch & Park, Modern Robotics, 2017, eq. 13.10, rows reordered, columns vx, vy, omega)
    return np.array([[1, -1, -a], [1, 1, a], [1, 1, -a], [1, -1, a]], dtype=float) / r


def differential_h(r: float = R, b: float = TRACK) -> np.ndarray:
    # r w = v -/+ omega b / 2, left then right (Lynch & Park 2017, §13.3)
    return np.array([[1, 0, -b / 2], [1, 0, b / 2]], dtype=float) / r


def lynch_park_step(q: np.ndarray, vb: np.ndarray) -> np.ndarray:
    """One odometry update, Lynch & Park 2017 §13.4 (eqs. 13.35-13.36), q = [x, y, phi]."""
    vx, vy, w = vb
    if w == 0.0:
        dqb = np.array([vx, vy, 0.0])
    else:
        dqb = np.array(
            [(vx * np.sin(w) + vy * (np.cos(w) - 1)) / w, (vy * np.sin(w) + vx * (1 - np.cos(w))) / w, w]
        )
    c, s = np.cos(q[2]), np.sin(q[2])
    return q + np.array([c * dqb[0] - s * dqb[1], s * dqb[0] + c * dqb[1], dqb[2]])


def run_encoders(forward: np.ndarray, angles: np.ndarray, pose0: np.ndarray, cpr: float) -> np.ndarray:
    odo = Odometry(source="encoders", forward=forward, counts_per_rev=cpr)
    odo.reset(pose0[None, :])
    for k, a in enumerate(angles):
        pose = odo.update(Readings(t=0.01 * k, encoder_counts=a[None, :] * cpr / (2 * np.pi)))
    return pose[0]


@pytest.mark.parametrize("h", [mecanum_h(), differential_h()], ids=["mecanum", "differential"])
def test_matches_lynch_park_odometry_update(h):
    f = np.linalg.pinv(h)
    rng = np.random.default_rng(13)
    q_ref = np.array([0.4, -0.2, 2.9])
    angles = np.cumsum(rng.normal(0.0, 3.0, (60, h.shape[0])), axis=0)
    angles = np.vstack([np.zeros(h.shape[0]), angles])
    for d in np.diff(angles, axis=0):
        q_ref = lynch_park_step(q_ref, f @ d)
    mine = run_encoders(f, angles, np.array([0.4, -0.2, 2.9]), cpr=2 * np.pi)
    assert mine[:2] == pytest.approx(q_ref[:2], abs=1e-12)
    assert wrap(mine[2] - q_ref[2]) == pytest.approx(0.0, abs=1e-12)


def test_mecanum_forward_matrix_is_lynch_park_closed_form():
    # Lynch & Park 2017 eq. 13.33: F = (r/4) [[1,1,1,1], [-1,1,1,-1], [-1,1,-1,1]/(l+w)]
    expected = R / 4 * np.array([[1, 1, 1, 1], [-1, 1, 1, -1], np.array([-1, 1, -1, 1]) / A])
    assert np.linalg.pinv(mecanum_h()) == pytest.approx(expected, abs=1e-14)


def test_quarter_circle_in_one_step_exact_versus_euler():
    # Worked arc (our own numbers): v T = pi/2 m with dtheta = pi/2 is a quarter of the unit
    # circle, ending at (1, 1). The Euler step goes straight to (pi/2, 0): it misses by
    # sqrt((pi/2 - 1)^2 + 1) = 1.15144 m.
    h = differential_h()
    wheel = h @ np.array([np.pi / 2, 0.0, np.pi / 2])
    angles = np.vstack([np.zeros(2), wheel])
    mine = run_encoders(np.linalg.pinv(h), angles, np.zeros(3), cpr=2 * np.pi)
    assert mine == pytest.approx([1.0, 1.0, np.pi / 2], abs=1e-12)
    euler = np.array([np.pi / 2, 0.0])
    assert np.hypot(*(mine[:2] - euler)) == pytest.approx(np.sqrt((np.pi / 2 - 1) ** 2 + 1), abs=1e-12)
    assert np.hypot(*(mine[:2] - euler)) == pytest.approx(1.15144, abs=1e-5)


def test_quarter_circle_in_n_steps_euler_gap_is_the_closed_form():
    # Euler with heading updated after each move: sum_k d (cos k D, sin k D) =
    # d sin(nD/2) / sin(D/2) (cos((n-1)D/2), sin((n-1)D/2)); the exact arc ends at (1, 1).
    n = 10
    big_d = np.pi / 2 / n
    d = big_d  # unit radius: arc length per step equals its angle
    h = differential_h()
    angles = np.outer(np.arange(n + 1), h @ np.array([d, 0.0, big_d]))
    mine = run_encoders(np.linalg.pinv(h), angles, np.zeros(3), cpr=2 * np.pi)
    assert mine[:2] == pytest.approx([1.0, 1.0], abs=1e-12)
    chord = d * np.sin(n * big_d / 2) / np.sin(big_d / 2)
    euler = chord * np.array([np.cos((n - 1) * big_d / 2), np.sin((n - 1) * big_d / 2)])
    gap = np.hypot(*(mine[:2] - euler))
    assert gap == pytest.approx(np.hypot(1 - euler[0], 1 - euler[1]), abs=1e-12)
    # by hand: chord = (pi/20) sin(pi/4) / sin(pi/40) = 1.41568 at 9 pi/40 -> (1.0765, 0.9194)
    assert gap == pytest.approx(0.1111, abs=1e-4)


def _circle_through_sensors(h: np.ndarray, twist: np.ndarray, *, quantise: bool, cpr: float):
    dt, ticks = 0.01, 1200
    box = Field(name="workshop floor", boundary=np.array([[-5, -5], [5, -5], [5, 5], [-5, 5.0]]))
    sensors = Sensors(
        SensorSuite(encoders=Encoders(counts_per_rev=cpr, quantise=quantise)),
        field=box, wheel_count=h.shape[0], dt=dt,
    )
    pose0 = np.array([[0.3, -0.4, 0.7]])
    sensors.reset([np.random.default_rng(0)], pose0)
    odo = Odometry(source="encoders", forward=np.linalg.pinv(h), counts_per_rev=cpr)
    odo.reset(pose0)
    for k in range(ticks + 1):
        t = k * dt
        truth = compose(pose0, exp(twist[None, :] * t))
        est = odo.update(sensors.read(t, truth, (h @ twist * t)[None, :]))
    return est[0], truth[0], ticks * dt


@pytest.mark.parametrize(
    "h, twist",
    [(differential_h(), np.array([0.5, 0.0, 0.5])), (mecanum_h(), np.array([0.4, 0.3, -0.6]))],
    ids=["differential", "mecanum"],
)
def test_encoder_circle_ends_on_the_analytic_arc(h, twist):
    est, truth, _ = _circle_through_sensors(h, twist, quantise=False, cpr=537.6)
    assert est[:2] == pytest.approx(truth[:2], abs=1e-9)
    assert wrap(est[2] - truth[2]) == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize(
    "h, twist",
    [(differential_h(), np.array([0.5, 0.0, 0.5])), (mecanum_h(), np.array([0.4, 0.3, -0.6]))],
    ids=["differential", "mecanum"],
)
def test_encoder_circle_with_quantisation_within_the_bound(h, twist):
    cpr = 537.6
    est, truth, duration = _circle_through_sensors(h, twist, quantise=True, cpr=cpr)
    g = np.linalg.pinv(h) * (2 * np.pi / cpr)  # counts -> body displacement
    # Each cumulative count is off by less than one, so (summation by parts) the heading is
    # off by less than sum|g_theta| and the position by less than
    # (sum|g_x| + sum|g_y|) (2 + total turn) + sum|g_theta| * path length
    # (derived here; common practice, no source).
    heading_bound = np.abs(g[2]).sum()
    turn = abs(twist[2]) * duration
    path = np.hypot(twist[0], twist[1]) * duration
    pos_bound = (np.abs(g[0]).sum() + np.abs(g[1]).sum()) * (2 + turn) + heading_bound * path
    err = np.hypot(*(est[:2] - truth[:2]))
    assert abs(wrap(est[2] - truth[2])) < heading_bound
    assert 1e-6 < err < pos_bound
