"""Unit tests of planners/profiles.py: sampling, limits, signs, averaging and errors."""

from __future__ import annotations

import numpy as np
import pytest

from planners.errors import PlanError
from planners.profiles import piecewise_profile, s_curve_profile, trapezoidal_profile


def _dense(p, n=4001):
    t = np.linspace(0.0, p.duration, n)
    return t, *p.sample(t)


@pytest.mark.parametrize("make", [
    lambda: trapezoidal_profile(2.0, max_speed=1.0, max_accel=2.0, max_decel=0.5,
                                start_speed=0.3, end_speed=0.1),
    lambda: s_curve_profile(2.0, max_speed=1.0, max_accel=2.0, max_decel=0.5, max_jerk=4.0,
                            start_speed=0.3, end_speed=0.1),
])
def test_profile_respects_limits_and_boundary_speeds(make):
    p = make()
    t, q, v, a, j = _dense(p)
    assert q[0] == 0.0 and q[-1] == pytest.approx(2.0, abs=1e-12)
    assert v[0] == pytest.approx(0.3) and v[-1] == pytest.approx(0.1, abs=1e-12)
    assert v.max() <= 1.0 + 1e-12
    assert a.max() <= 2.0 + 1e-12 and a.min() >= -0.5 - 1e-12
    # speed is the derivative of position (trapezoid rule on the dense samples)
    dq = np.cumsum(0.5 * (v[1:] + v[:-1]) * np.diff(t))
    assert np.allclose(q[1:], dq, atol=1e-6)


def test_s_curve_jerk_bounded_and_acceleration_continuous():
    p = s_curve_profile(1.0, max_speed=2.0, max_accel=1.5, max_jerk=6.0)
    t, q, v, a, j = _dense(p, 20001)
    assert np.abs(j).max() == pytest.approx(6.0)
    assert np.abs(np.diff(a)).max() < 6.0 * (t[1] - t[0]) * 1.0001


def test_negative_distance_mirrors_the_profile():
    pos = s_curve_profile(3.0, max_speed=1.0, max_accel=1.0, max_jerk=5.0, start_speed=0.5)
    neg = s_curve_profile(-3.0, max_speed=1.0, max_accel=1.0, max_jerk=5.0, start_speed=-0.5)
    assert neg.duration == pytest.approx(pos.duration, abs=1e-12)
    t = np.linspace(0.0, pos.duration, 7)
    assert np.allclose(neg.sample(t)[0], -pos.sample(t)[0])
    assert neg.peak_speed == pytest.approx(-1.0)


def test_sample_outside_the_profile_continues_at_end_speeds():
    p = trapezoidal_profile(1.0, max_speed=1.0, max_accel=1.0, start_speed=0.5, end_speed=0.2)
    q, v, a, j = p.sample(np.array([-1.0, p.duration + 2.0]))
    assert q[0] == pytest.approx(-0.5) and v[0] == pytest.approx(0.5) and a[0] == 0.0
    assert q[1] == pytest.approx(1.4) and v[1] == pytest.approx(0.2) and a[1] == 0.0


def test_integral_matches_quadrature():
    p = s_curve_profile(2.0, max_speed=1.0, max_accel=1.0, max_jerk=3.0)
    t = np.linspace(0.0, p.duration + 1.0, 40001)
    q = p.sample(t)[0]
    numeric = np.concatenate([[0.0], np.cumsum(0.5 * (q[1:] + q[:-1]) * np.diff(t))])
    assert np.allclose(p.integral(t), numeric, atol=1e-7)


def test_moving_average_of_a_trapezoid_is_the_s_curve():
    # averaging a trapezoid's speed over W = a / j gives the S-curve with the same limits
    # when both accelerations reach a and there is a cruise (common practice, no source)
    a, j = 1.0, 5.0
    trap = trapezoidal_profile(4.0, max_speed=1.0, max_accel=a)
    curve = s_curve_profile(4.0, max_speed=1.0, max_accel=a, max_jerk=j)
    assert trap.duration + a / j == pytest.approx(curve.duration, abs=1e-12)
    t = np.linspace(0.0, curve.duration, 501)
    q, v, acc = trap.averaged(a / j, t)
    cq, cv, ca, _ = curve.sample(t)
    assert np.allclose(q, cq, atol=1e-12) and np.allclose(v, cv, atol=1e-12)
    assert np.allclose(acc, ca, atol=1e-12)
    assert trap.accel_change(a / j) == pytest.approx(a)


def test_piecewise_profile_and_accel_change():
    p = piecewise_profile(np.array([0.0, 1.0]), np.array([0.0, 2.0]), np.array([4.0, -2.0]),
                          np.array([0.5, 1.0]))
    assert p.duration == 1.5
    assert p.sample(np.array([1.5]))[1][0] == pytest.approx(0.0)
    assert p.accel_change(0.1) == pytest.approx(6.0)
    assert p.accel_change(2.0) == pytest.approx(4.0)
    with pytest.raises(PlanError, match="constant-acceleration"):
        s_curve_profile(1.0, max_speed=1.0, max_accel=1.0, max_jerk=1.0).accel_change(0.1)


def test_zero_distance_at_rest_is_empty():
    p = trapezoidal_profile(0.0, max_speed=1.0, max_accel=1.0)
    assert p.duration == 0.0
    assert p.sample(np.zeros(0))[0].shape == (0,)


@pytest.mark.parametrize("kwargs, match", [
    ({"max_speed": 0.0}, "max_speed must be > 0"),
    ({"max_accel": -1.0}, "max_accel must be > 0"),
    ({"max_decel": float("nan")}, "max_decel must be > 0"),
    ({"start_speed": 2.0}, "start_speed must be between 0 and max_speed"),
    ({"end_speed": -0.1}, "end_speed must be between 0 and max_speed"),
    ({"start_speed": 1.0, "distance": 0.1}, "distance must be >= 0.5 m to brake"),
    ({"end_speed": 1.0, "distance": 0.1}, "distance must be >= 0.5 m to reach"),
])
def test_trapezoid_errors(kwargs, match):
    args = {"distance": 1.0, "max_speed": 1.0, "max_accel": 1.0, **kwargs}
    h = args.pop("distance")
    with pytest.raises(PlanError, match=match):
        trapezoidal_profile(h, **args)


@pytest.mark.parametrize("kwargs, match", [
    ({"max_jerk": 0.0}, "max_jerk must be > 0"),
    ({"start_speed": 1.0, "distance": 0.1}, "distance must be >= .* to go from start_speed"),
])
def test_s_curve_errors(kwargs, match):
    args = {"distance": 1.0, "max_speed": 1.0, "max_accel": 1.0, "max_jerk": 5.0, **kwargs}
    h = args.pop("distance")
    with pytest.raises(PlanError, match=match):
        s_curve_profile(h, **args)
