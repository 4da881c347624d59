"""Wheel control: feedforward derivation, the duty law, saturation, anti-windup, batching."""

from __future__ import annotations

import numpy as np
import pytest

from planners.control import WheelController, feedforward_from_motor
from planners.gains import (
    bryson,
    discretise,
    discretise_first_order,
    simc_integral_gain,
    velocity_lqr,
)
from planners.errors import ScenarioError

MOTOR = dict(
    free_speed=5000 * 2 * np.pi / 60,
    stall_torque=0.35,
    stall_current=25.0,
    free_current=0.7,
    voltage=12.0,
    gear_ratio=19.2,
    gear_efficiency=0.85,
    mass_share=3.0,
    wheel_radius=0.05,
    wheel_inertia=2e-4,
    rotor_inertia=3e-6,
    wheels=4,
)


def test_feedforward_full_voltage_reaches_free_speed():
    ff = feedforward_from_motor(**MOTOR)
    wheel_free = MOTOR["free_speed"] / MOTOR["gear_ratio"]
    np.testing.assert_allclose(ff.kS + ff.kV * wheel_free, 12.0, rtol=1e-12)
    np.testing.assert_allclose(ff.free_speed, wheel_free, rtol=1e-12)
    assert ff.kS.shape == ff.kV.shape == ff.kA.shape == (4,)


def test_feedforward_static_friction_is_free_current_times_resistance():
    ff = feedforward_from_motor(**MOTOR)
    np.testing.assert_allclose(ff.kS, 0.7 * 12.0 / 25.0, rtol=1e-12)


def test_feedforward_accel_at_stall_matches_newton():
    # full voltage at rest: the shaft gives stall torque; Newton at the wheel with the rotor
    # before the gearbox: tau_s = (J_r G + J_L / (eta G)) dw/dt
    ff = feedforward_from_motor(**MOTOR)
    g, eta = MOTOR["gear_ratio"], MOTOR["gear_efficiency"]
    j_load = MOTOR["mass_share"] * MOTOR["wheel_radius"] ** 2 + MOTOR["wheel_inertia"]
    expected = MOTOR["stall_torque"] / (MOTOR["rotor_inertia"] * g + j_load / (eta * g))
    np.testing.assert_allclose((12.0 - ff.kS) / ff.kA, expected, rtol=1e-12)


def test_feedforward_per_wheel_values():
    ff = feedforward_from_motor(**{**MOTOR, "mass_share": np.array([2.0, 2.0, 4.0, 4.0])})
    assert ff.kA[2] > ff.kA[0]
    np.testing.assert_array_equal(ff.kV, np.full(4, ff.kV[0]))


@pytest.mark.parametrize(
    ("change", "match"),
    [
        ({"free_current": 30.0}, "free_current must be >= 0 and < stall_current"),
        ({"gear_ratio": 0.0}, "gear_ratio must be > 0"),
        ({"voltage": -1.0}, "voltage must be > 0"),
    ],
)
def test_feedforward_rejects_bad_motor(change, match):
    with pytest.raises(ScenarioError, match=match):
        feedforward_from_motor(**{**MOTOR, **change})


def test_first_order_discretisation_matches_matrix_form():
    ad, bd = discretise_first_order(0.4, 0.05, 0.005)
    a2, b2 = discretise(np.array([[-0.4 / 0.05]]), np.array([[1 / 0.05]]), 0.005)
    assert ad == pytest.approx(a2[0, 0], rel=1e-13)
    assert bd == pytest.approx(b2[0, 0], rel=1e-12)


def test_bryson_weights():
    q, r = bryson([0.5, 2.0], 4.0)
    np.testing.assert_array_equal(q, np.diag([4.0, 0.25]))
    np.testing.assert_array_equal(r, [[1 / 16]])


def test_lqr_gain_grows_with_tighter_error():
    loose = velocity_lqr(0.4, 0.05, 0.005, max_error=5.0, max_effort=12.0)
    tight = velocity_lqr(0.4, 0.05, 0.005, max_error=1.0, max_effort=12.0)
    assert tight[0] > loose[0] > 0.0


def test_simc_integral_time_is_plant_time_constant_for_slow_loops():
    # a gentle kP: closed-loop time constant over tau/4, so tau_I = tau = kA / kV
    ki = simc_integral_gain(0.1, 0.4, 0.05, 0.005)
    assert ki[0] == pytest.approx(0.1 / (0.05 / 0.4), rel=1e-12)


def _ctl(**kw):
    base = dict(wheels=2, dt=0.005, voltage=12.0, kS=0.3, kV=0.4, kA=0.05)
    return WheelController(**{**base, **kw})


def test_duty_is_feedforward_over_battery_when_on_target():
    ctl = _ctl(kP=1.0, kI=2.0)
    ctl.reset(1)
    w = np.array([[10.0, -5.0]])
    a = np.array([[20.0, 0.0]])
    duty = ctl.duty(w, a, w, np.array([11.0]))
    expected = (0.3 * np.sign(w) + 0.4 * w + 0.05 * a) / 11.0
    np.testing.assert_allclose(duty, expected, rtol=1e-14)


def test_saturation_scales_the_whole_vector():
    ctl = _ctl(kP=0.0, kI=0.0)
    ctl.reset(1)
    w = np.array([[60.0, 20.0]])
    duty = ctl.duty(w, np.zeros((1, 2)), w, np.array([12.0]))
    u = 0.3 + 0.4 * w[0]
    np.testing.assert_allclose(duty[0], u / u[0], rtol=1e-14)
    assert duty[0, 0] == 1.0


def test_integral_is_bounded_and_held_in_saturation():
    ctl = _ctl(kP=0.0, kI=50.0, i_limit=2.0)
    ctl.reset(1)
    target = np.array([[5.0, 5.0]])
    for _ in range(200):  # error 5 rad/s forever, no saturation: the clamp holds it
        ctl.duty(target, np.zeros((1, 2)), np.zeros((1, 2)), np.array([12.0]))
    np.testing.assert_allclose(ctl.integral, 2.0)
    ctl.reset(1)
    far = np.array([[40.0, 40.0]])  # feedforward alone saturates: no integration at all
    for _ in range(50):
        ctl.duty(far, np.zeros((1, 2)), np.zeros((1, 2)), np.array([12.0]))
    np.testing.assert_array_equal(ctl.integral, 0.0)


def test_batch_equals_runs_of_one():
    rng = np.random.default_rng(7)
    n, ticks = 5, 30
    target = rng.normal(0.0, 20.0, (ticks, n, 2))
    accel = rng.normal(0.0, 50.0, (ticks, n, 2))
    meas = target + rng.normal(0.0, 3.0, (ticks, n, 2))
    vb = rng.uniform(10.0, 13.0, (ticks, n))
    ctl = _ctl(kD=0.01)
    ctl.reset(n)
    batch = np.stack([ctl.duty(target[k], accel[k], meas[k], vb[k]) for k in range(ticks)])
    for i in range(n):
        ctl.reset(1)
        one = np.stack(
            [
                ctl.duty(
                    target[k, i : i + 1], accel[k, i : i + 1], meas[k, i : i + 1], vb[k, i : i + 1]
                )
                for k in range(ticks)
            ]
        )
        np.testing.assert_array_equal(one[:, 0], batch[:, i])
    assert np.all(np.abs(batch) <= 1.0)


def test_empty_batch():
    ctl = _ctl()
    ctl.reset(0)
    z = np.zeros((0, 2))
    assert ctl.duty(z, z, z, np.zeros(0)).shape == (0, 2)


def test_per_robot_gains():
    ctl = _ctl(kV=np.array([[0.4, 0.4], [0.5, 0.5]]), kP=0.0, kI=0.0)
    ctl.reset(2)
    w = np.full((2, 2), 10.0)
    duty = ctl.duty(w, np.zeros((2, 2)), w, np.full(2, 12.0))
    np.testing.assert_allclose(duty[:, 0], [(0.3 + 4.0) / 12.0, (0.3 + 5.0) / 12.0])
    with pytest.raises(ScenarioError, match="kV must be"):
        ctl.reset(3)


def test_constants_from_motor_when_absent():
    ff = feedforward_from_motor(**{**MOTOR, "wheels": 2})
    ctl = WheelController(wheels=2, dt=0.005, voltage=12.0, motor=ff, kS=0.1)
    np.testing.assert_array_equal(ctl.gains["kV"], ff.kV)
    assert float(ctl.gains["kS"]) == 0.1
    assert np.all(ctl.gains["kP"] > 0.0) and np.all(ctl.gains["kI"] > 0.0)


def test_missing_constant_without_motor():
    with pytest.raises(ScenarioError, match="control: kA must be given or derived"):
        WheelController(wheels=2, dt=0.005, voltage=12.0, kS=0.1, kV=0.4)


def test_unknown_key_suggests():
    with pytest.raises(ScenarioError, match="did you mean kP"):
        _ctl(kp=1.0)


def test_bad_shape_and_bound():
    with pytest.raises(ScenarioError, match="control: kS must be a number, one per wheel"):
        _ctl(kS=np.ones(3))
    with pytest.raises(ScenarioError, match="control: kV must be > 0"):
        _ctl(kV=-0.4)


def test_duty_before_reset_with_per_robot_gains():
    ctl = _ctl(kS=np.zeros((2, 2)))
    z = np.zeros((2, 2))
    with pytest.raises(RuntimeError, match="call reset"):
        ctl.duty(z, z, z, np.full(2, 12.0))
