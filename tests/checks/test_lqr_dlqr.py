"""LQR synthesis against python-control's dlqr and scipy's DARE, discretisation against c2d.

Reference libraries: python-control (`control.dlqr`, `control.c2d` with zero-order hold) and
scipy (`scipy.linalg.solve_discrete_are`, `scipy.signal.cont2discrete`). Bryson's rule
(A. E. Bryson, Y.-C. Ho, *Applied Optimal Control*, 1975; as taught in Franklin, Powell,
Emami-Naeini, *Feedback Control of Dynamic Systems*, the LQR design section; from memory):
Q_ii = 1 / max(x_i)^2, R_jj = 1 / max(u_j)^2.
"""

from __future__ import annotations

import control
import numpy as np
import pytest
import scipy.linalg
import scipy.signal

from planners.gains import bryson, discretise, discretise_first_order, dlqr, velocity_lqr
from planners.trackers import make_tracker
from planners.trackers.lqr import error_model
from tests.planners.plan_fixtures import figure_eight_plan

DT = 0.005


def _c2d(a, b, dt):
    sys = control.c2d(
        control.ss(a, b, np.eye(a.shape[0]), np.zeros((a.shape[0], b.shape[1]))), dt, "zoh"
    )
    return np.asarray(sys.A), np.asarray(sys.B)


@pytest.mark.parametrize(("kv", "ka"), [(0.4, 0.05), (0.12, 0.004), (1.5, 0.3)])
def test_velocity_lqr_equals_dlqr(kv, ka):
    # first-order velocity model A = -kV/kA, B = 1/kA discretised by python-control's c2d
    ad, bd = _c2d(np.array([[-kv / ka]]), np.array([[1.0 / ka]]), DT)
    q, r = np.array([[1 / 3.0**2]]), np.array([[1 / 12.0**2]])
    k_ref, _, _ = control.dlqr(ad, bd, q, r)
    k = velocity_lqr(kv, ka, DT, max_error=3.0, max_effort=12.0)
    assert k[0] == pytest.approx(float(k_ref[0, 0]), rel=1e-9)
    # and the exact scalar discretisation itself
    ad1, bd1 = discretise_first_order(kv, ka, DT)
    assert (ad1, bd1) == pytest.approx((ad[0, 0], bd[0, 0]), rel=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_dlqr_equals_python_control_and_scipy(seed):
    rng = np.random.default_rng(seed)
    n, m = 3, 2
    a = rng.normal(0.0, 0.6, (n, n)) + np.eye(n)
    b = rng.normal(0.0, 1.0, (n, m))
    q, r = bryson(rng.uniform(0.1, 1.0, n), rng.uniform(0.5, 2.0, m))
    k, p = dlqr(a, b, q, r)
    k_ref, s_ref, _ = control.dlqr(a, b, q, r)
    np.testing.assert_allclose(k, k_ref, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(p, s_ref, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(p, scipy.linalg.solve_discrete_are(a, b, q, r), rtol=1e-9)


@pytest.mark.parametrize("speed", [0.5, -0.3, 1.7])
def test_discretise_equals_scipy_zoh(speed):
    a, b = error_model(speed, 0.4)
    ad, bd = discretise(a, b, DT)
    ref = scipy.signal.cont2discrete((a, b, np.eye(3), np.zeros((3, 2))), DT, method="zoh")
    np.testing.assert_allclose(ad, ref[0], rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(bd, ref[1], rtol=1e-12, atol=1e-15)


def test_tracker_schedule_equals_dlqr():
    plan = figure_eight_plan()
    tracker = make_tracker("lqr", chassis="differential")
    tracker.reset(plan, 1)
    p = tracker.params
    q = np.diag(
        1.0
        / np.array([p["max_position_error"], p["max_position_error"], p["max_heading_error"]]) ** 2
    )
    r = np.diag(1.0 / np.array([p["max_speed_correction"], p["max_turn_correction"]]) ** 2)
    for speed, gain in zip(tracker.schedule_speeds, tracker.schedule_gains, strict=True):
        ad, bd = _c2d(*error_model(speed), plan.dt)
        k_ref, _, _ = control.dlqr(ad, bd, q, r)
        np.testing.assert_allclose(gain, k_ref, rtol=1e-9, atol=1e-12)
    # between design speeds the gain is the linear blend of its neighbours
    v0, v1 = tracker.schedule_speeds[-3], tracker.schedule_speeds[-2]
    mid = tracker.gain(0.25 * v0 + 0.75 * v1)
    np.testing.assert_allclose(
        mid, 0.25 * tracker.schedule_gains[-3] + 0.75 * tracker.schedule_gains[-2], rtol=1e-12
    )
    # through zero speed the lateral gain of the turn command vanishes
    assert abs(tracker.gain(0.0)[1, 1]) < 1e-9 * abs(tracker.gain(0.1)[1, 1])
