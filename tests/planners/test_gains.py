"""Tracker gains put the trackers' own linearised error dynamics at the requested poles.

The error dynamics are not taken from planners.gains: the Jacobian of the closed-loop error
rate is measured by finite differences around the plan, with each velocity command coming
from the tracker's ``command`` (so a law that differs from the one the gains assume fails
here). Expected poles: unicycle ``-2 zeta a`` and ``-zeta a +- i a sqrt(1 - zeta^2)`` (De Luca,
Oriolo, Vendittelli 2001, linearised tracking error); holonomic ``-k, -k, -k_h``
(first order per field axis, common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from planners.control import feedforward_from_motor
from planners.errors import ScenarioError
from planners.gains import (
    holonomic_gains,
    unicycle_gains,
    velocity_loop_time_constant,
    wheel_loop_weights,
)
from planners.gains_heading import gyro_tick_sigma
from planners.trackers import make_tracker
from planners.trackers.base import reference
from tests.planners.plan_fixtures import circle_plan, line_plan


def _rot(theta):
    c, s = np.cos(theta), np.sin(theta)
    return np.array([[c, -s], [s, c]])


def _field_rate(pose, body):
    return np.concatenate([_rot(pose[2]) @ body[:2], [body[2]]])


def _error(ref, pose, frame):
    d = ref[:2] - pose[:2]
    pos = _rot(pose[2]).T @ d if frame == "robot" else d
    return np.concatenate([pos, [ref[2] - pose[2]]])


def _pose(ref, e, frame):
    theta = ref[2] - e[2]
    d = _rot(theta) @ e[:2] if frame == "robot" else e[:2]
    return np.concatenate([ref[:2] - d, [theta]])


def _error_jacobian(tracker, plan, t, frame):
    """d(e')/de at e = 0, e' measured by central differences along the motion."""
    ref, ref_vel, _ = reference(plan, t)
    ref_rate = _field_rate(ref, ref_vel)

    def rate(e):
        pose = _pose(ref, e, frame)
        cmd = tracker.command(t, pose[None, :], np.zeros((1, 3))).velocity[0]
        move = _field_rate(pose, cmd)
        h = 1e-6
        ahead = _error(ref + h * ref_rate, pose + h * move, frame)
        behind = _error(ref - h * ref_rate, pose - h * move, frame)
        return (ahead - behind) / (2 * h)

    assert np.allclose(rate(np.zeros(3)), 0.0, atol=1e-7)  # zero error stays zero
    d = 1e-5
    return np.column_stack([(rate(d * np.eye(3)[j]) - rate(-d * np.eye(3)[j])) / (2 * d) for j in range(3)])


def _sorted(eig):
    return np.array(sorted(eig, key=lambda z: (z.real, z.imag)))


@pytest.mark.parametrize(
    "speed,turn,bandwidth,damping,reverse",
    [(1.2, 0.0, 4.0, 0.7, False), (0.5, 0.5, 2.0, 0.6, False), (0.4, 0.0, 3.0, 0.9, True)],
    ids=["line", "circle", "reverse-line"],
)
def test_unicycle_gains_place_the_linearised_poles(speed, turn, bandwidth, damping, reverse):
    if turn:
        plan = circle_plan(radius=speed / turn, speed=speed, turns=0.5)
    else:
        plan = line_plan(speed=speed, length=3.0, reverse=reverse)
    gains = unicycle_gains(bandwidth=bandwidth, damping=damping, speed=speed, turn_rate=turn)
    tracker = make_tracker("unicycle", chassis="differential", **gains)
    tracker.reset(plan, 1)
    jac = _error_jacobian(tracker, plan, 200 * plan.dt, "robot")
    a, z = bandwidth, damping
    want = [-2 * z * a, complex(-z * a, a * np.sqrt(1 - z * z)), complex(-z * a, -a * np.sqrt(1 - z * z))]
    np.testing.assert_allclose(_sorted(np.linalg.eigvals(jac)), _sorted(want), rtol=1e-5, atol=1e-6)


def test_unicycle_bandwidth_falls_with_speed():
    # a = sqrt(b) |v_d| on a straight: at half the design speed, half the natural frequency
    gains = unicycle_gains(bandwidth=4.0, damping=0.7, speed=1.2)
    plan = line_plan(speed=0.6, length=3.0)
    tracker = make_tracker("unicycle", chassis="skid", **gains)
    tracker.reset(plan, 1)
    eig = np.linalg.eigvals(_error_jacobian(tracker, plan, 100 * plan.dt, "robot"))
    np.testing.assert_allclose(np.min(np.abs(eig)), 2.0, rtol=1e-5)


@pytest.mark.parametrize("heading_bandwidth", [None, 6.0], ids=["same", "faster-heading"])
def test_holonomic_gains_place_the_poles(heading_bandwidth):
    gains = holonomic_gains(bandwidth=3.0, heading_bandwidth=heading_bandwidth)
    plan = circle_plan(radius=1.0, speed=0.5, turns=0.5)
    tracker = make_tracker("holonomic", chassis="mecanum", **gains)
    tracker.reset(plan, 1)
    jac = _error_jacobian(tracker, plan, 150 * plan.dt, "field")
    k_h = 3.0 if heading_bandwidth is None else heading_bandwidth
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(jac).real), np.sort([-3.0, -3.0, -k_h]), atol=1e-6)
    np.testing.assert_allclose(np.linalg.eigvals(jac).imag, 0.0, atol=1e-6)


def test_unicycle_characteristic_polynomial_of_the_docstring():
    # det(sI - A) = (s + 2 zeta a)(s^2 + 2 zeta a s + a^2), a^2 = w_d^2 + b v_d^2 (derived)
    v, w, z = 0.8, 0.3, 0.5
    g = unicycle_gains(bandwidth=2.5, damping=z, speed=v, turn_rate=w)
    a = np.sqrt(w**2 + g["b"] * v**2)
    k = 2 * z * a
    mat = np.array([[-k, w, 0.0], [-w, 0.0, v], [0.0, -g["b"] * v, -k]])
    np.testing.assert_allclose(np.poly(mat), np.polymul([1, k], [1, 2 * z * a, a * a]), rtol=1e-12)
    assert a == pytest.approx(2.5, rel=1e-12)


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"bandwidth": 2.0, "damping": -0.5, "speed": 1.0}, r"damping must be in \(0, 1\).*got -0.5"),
        ({"bandwidth": 2.0, "damping": 1.0, "speed": 1.0}, r"damping must be in \(0, 1\)"),
        ({"bandwidth": 0.0, "damping": 0.7, "speed": 1.0}, r"bandwidth must be > 0"),
        ({"bandwidth": 2.0, "damping": 0.7, "speed": 0.0}, r"design speed must be nonzero"),
        ({"bandwidth": 2.0, "damping": 0.7, "speed": 1.0, "turn_rate": 2.5}, r"turn rate must be below"),
    ],
    ids=["negative-damping", "damping-one", "zero-bandwidth", "zero-speed", "turn-too-fast"],
)
def test_unicycle_gains_reject_bad_input(kwargs, match):
    with pytest.raises(ScenarioError, match=match):
        unicycle_gains(**kwargs)


def test_holonomic_gains_reject_bad_input():
    with pytest.raises(ScenarioError, match=r"heading_bandwidth must be > 0 rad/s, got -1"):
        holonomic_gains(bandwidth=2.0, heading_bandwidth=-1.0)


def test_wheel_loop_weights_defaults_and_time_constant():
    ff = feedforward_from_motor(
        free_speed=600.0, stall_torque=0.2, stall_current=20.0, free_current=0.5, voltage=12.0,
        gear_ratio=20.0, mass_share=2.5, wheel_radius=0.05, wheels=2,
    )
    err, eff = wheel_loop_weights(ff.kS, ff.kV, 12.0)
    np.testing.assert_allclose(err, 0.2 * ff.free_speed, rtol=1e-12)  # 20 % of free speed
    np.testing.assert_allclose(eff, [12.0, 12.0])
    err, eff = wheel_loop_weights(ff.kS, ff.kV, 12.0, max_error=3.0, max_effort=6.0)
    np.testing.assert_allclose(err, [3.0, 3.0])
    np.testing.assert_allclose(eff, [6.0, 6.0])
    # no feedback: the plant's own time constant kA / kV; dead-beat feedback: one tick
    np.testing.assert_allclose(velocity_loop_time_constant(0.0, ff.kV, ff.kA, 0.005), ff.time_constant, rtol=1e-9)
    dead_beat = np.exp(-ff.kV / ff.kA * 0.005) * ff.kV / (1 - np.exp(-ff.kV / ff.kA * 0.005))
    np.testing.assert_allclose(velocity_loop_time_constant(dead_beat, ff.kV, ff.kA, 0.005), 0.005)


def test_gyro_tick_sigma_is_the_mean_of_white_noise_over_a_sample():
    # white rate noise of density N averaged over T has std N / sqrt(T) (IEEE Std 952-1997,
    # angle random walk): average fine samples of variance N^2 / delta over T / delta of them
    rng = np.random.default_rng(7)
    density, period, delta = 0.003, 0.005, 0.005 / 50
    fine = rng.normal(0.0, density / np.sqrt(delta), size=(20000, 50))
    assert np.std(fine.mean(axis=1)) == pytest.approx(gyro_tick_sigma(density, period), rel=0.03)
