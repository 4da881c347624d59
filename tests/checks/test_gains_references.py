"""Gain synthesis of planners.gains / planners.gains_heading against reference libraries.

Reference libraries: python-control 0.10 (`control.dlqr`, `control.dlqe`, `control.c2d`),
scipy (`scipy.linalg.solve_discrete_are`) and filterpy (`filterpy.kalman.KalmanFilter`, whose
predict/update recursion, iterated to convergence, must reach the DARE's steady state).

Note on `control.dlqe`: it returns the gain of the *predictor* form
x[k+1] = A x[k] + L (y[k] - C x[k]), so L = F K with our filter gain K = P H' (H P H' + R)^-1,
and its P is the prior (predicted) covariance (python-control docs of dlqe; the source calls
dare(A', C', G QN G', RN)).
"""

from __future__ import annotations

import control
import numpy as np
import pytest
import scipy.linalg
from filterpy.kalman import KalmanFilter

from planners.control import feedforward_from_motor
from planners.gains import bryson, discretise, discretise_first_order, dlqr, velocity_lqr
from planners.gains_heading import heading_kalman

DT = 0.005
# a demo wheel drive: the workshop-loop cart's motor and gearbox (invented numbers)
WHEEL = feedforward_from_motor(
    free_speed=5800 * 2 * np.pi / 60, stall_torque=0.42, stall_current=22.0, free_current=1.4,
    voltage=12.6, gear_ratio=13.7, gear_efficiency=0.85, mass_share=3.0, wheel_radius=0.05, wheels=1,
)


def test_wheel_lqr_equals_python_control_dlqr():
    kv, ka = float(WHEEL.kV[0]), float(WHEEL.kA[0])
    # python-control c2d (zero-order hold) of dw/dt = -kV/kA w + u/kA
    sys_d = control.c2d(control.ss(-kv / ka, 1.0 / ka, 1.0, 0.0), DT, method="zoh")
    q, r = bryson(0.2 * 12.6 / kv, 12.6)
    k_ref, s_ref, _ = control.dlqr(sys_d.A, sys_d.B, q, r)
    ad, bd = discretise_first_order(kv, ka, DT)
    k, p = dlqr(np.array([[ad]]), np.array([[bd]]), q, r)
    np.testing.assert_allclose(k, k_ref, rtol=1e-9, atol=0.0)
    np.testing.assert_allclose(p, s_ref, rtol=1e-9, atol=0.0)
    kp = velocity_lqr(kv, ka, DT, max_error=0.2 * 12.6 / kv, max_effort=12.6)
    np.testing.assert_allclose(kp, k_ref[0], rtol=1e-9, atol=0.0)


def test_two_state_lqr_equals_python_control_dlqr():
    # wheel speed plus the integral of its error (a PI design): x = [w, int e], u = V
    kv, ka = float(WHEEL.kV[0]), float(WHEEL.kA[0])
    a = np.array([[-kv / ka, 0.0], [-1.0, 0.0]])
    b = np.array([[1.0 / ka], [0.0]])
    ad, bd = discretise(a, b, DT)
    sys_d = control.c2d(control.ss(a, b, np.eye(2), np.zeros((2, 1))), DT, method="zoh")
    np.testing.assert_allclose(ad, sys_d.A, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(bd, sys_d.B, rtol=1e-12, atol=1e-15)
    q, r = bryson([5.0, 0.2], 12.6)
    k, p = dlqr(ad, bd, q, r)
    k_ref, s_ref, _ = control.dlqr(ad, bd, q, r)
    np.testing.assert_allclose(k, k_ref, rtol=1e-9, atol=0.0)
    np.testing.assert_allclose(p, s_ref, rtol=1e-9, atol=0.0)


CASES = {  # gyro sigma per tick [rad/s], bias walk [rad/s/sqrt(s)], heading sigma [rad]
    "fixes": (0.0012, 1e-4, np.radians(1.0)),
    "odometry": (0.02, 1e-4, 0.05),
    "no-bias-walk": (0.0012, 0.0, 0.05),
}


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_heading_gain_equals_python_control_dlqe_and_scipy(case):
    gyro, walk, sigma = CASES[case]
    g = heading_kalman(dt=DT, gyro_sigma=gyro, bias_walk=walk, sigma=sigma)
    f = np.array([[1.0, -DT], [0.0, 1.0]])
    q = np.diag([(gyro * DT) ** 2, walk**2 * DT])
    np.testing.assert_array_equal(g.f, f)
    np.testing.assert_allclose(g.q, q, rtol=1e-15)
    # scipy, filter form of the DARE
    p = scipy.linalg.solve_discrete_are(f.T, g.h.T, q, g.r)
    np.testing.assert_allclose(g.prior, p, rtol=1e-9, atol=1e-18)
    l_ref, p_ref, _ = control.dlqe(f, np.eye(2), g.h, q, g.r)
    np.testing.assert_allclose(g.prior, p_ref, rtol=1e-9, atol=1e-18)
    np.testing.assert_allclose(f @ g.gain, l_ref, rtol=1e-9, atol=1e-15)


def _filterpy_cycle(gyro, walk, sigma, every, cycles):
    kf = KalmanFilter(dim_x=2, dim_z=1)
    kf.F = np.array([[1.0, -DT], [0.0, 1.0]])
    kf.Q = np.diag([(gyro * DT) ** 2, walk**2 * DT])
    kf.H = np.array([[1.0, 0.0]])
    kf.R = np.array([[sigma**2]])
    kf.P = np.diag([0.01, 0.01])
    for _ in range(cycles):
        for _ in range(every):
            kf.predict()
        prior = kf.P.copy()
        kf.update(np.zeros(1))
    return prior, kf.P.copy(), kf.K.copy()


@pytest.mark.parametrize("every", [1, 20], ids=["every-tick", "every-20-ticks"])
def test_heading_steady_state_equals_filterpy_recursion(every):
    # larger noise than a real gyro so the recursion settles in a few thousand steps
    gyro, walk, sigma = 0.5, 0.05, 0.02
    g = heading_kalman(dt=DT, gyro_sigma=gyro, bias_walk=walk, sigma=sigma, every=every)
    prior, post, gain = _filterpy_cycle(gyro, walk, sigma, every, cycles=4000 // every + 200)
    np.testing.assert_allclose(g.prior, prior, rtol=1e-6)
    np.testing.assert_allclose(g.posterior, post, rtol=1e-6)
    np.testing.assert_allclose(g.gain, gain, rtol=1e-6)
