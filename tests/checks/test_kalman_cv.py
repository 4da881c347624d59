"""The ``kalman`` estimator's constant-velocity model against filterpy and python-control."""

from __future__ import annotations

import numpy as np
import scipy.linalg
from filterpy.common import Q_continuous_white_noise
from filterpy.kalman import KalmanFilter

import control
from planners.estimators import ESTIMATORS
from planners.estimators.kalman_cv import cv_model
from planners.readings import Readings
from planners.se2 import compose, exp
from tests.planners.test_estimator_fixtures import DT, context

KW = dict(model="constant-velocity", accel_noise=0.8, turn_accel_noise=1.5)
SIGMA = np.array([0.02, 0.02, 0.02])  # the fixture's fix sensor


def _fixes(n: int, ticks: int, rng: np.random.Generator) -> tuple[np.ndarray, list[Readings]]:
    # robots on arcs (heading kept away from +-pi, where filterpy would not wrap); fixes every
    # 20 ticks, one robot's fix missing now and then
    pose = np.tile([[1.0, 0.5, -0.5]], (n, 1))
    twist = np.column_stack([0.5 + 0.1 * np.arange(n), np.zeros(n), 0.3 - 0.1 * np.arange(n)])
    truth, out = [], []
    for k in range(ticks):
        if k:
            pose = compose(pose, exp(twist * DT))
        truth.append(pose.copy())
        valid = np.full(n, k % 20 == 0 and k > 0) & (rng.random(n) > 0.2)
        fix = np.where(valid[:, None], pose + SIGMA * rng.standard_normal((n, 3)), np.nan)
        out.append(Readings(
            t=k * DT, encoder_counts=np.zeros((n, 2)), fix=fix, fix_valid=valid,
            fix_time=np.where(valid, k * DT, np.nan), fix_sigma=SIGMA,
        ))
    return np.array(truth), out


def test_process_noise_is_the_continuous_white_noise_acceleration_model() -> None:
    # reference: filterpy.common.Q_continuous_white_noise(dim=2, dt, spectral_density)
    # (Bar-Shalom, Li, Kirubarajan 2001, §6.2.2, eq. 6.2.2-12)
    f, q, h = cv_model(DT, 0.8, 1.5)
    ref = Q_continuous_white_noise(dim=2, dt=DT, spectral_density=0.8**2)
    np.testing.assert_allclose(q[:2, :2], ref, rtol=1e-14)
    np.testing.assert_allclose(q[2:4, 2:4], ref, rtol=1e-14)
    np.testing.assert_allclose(q[4:, 4:], Q_continuous_white_noise(2, DT, 1.5**2), rtol=1e-14)
    np.testing.assert_array_equal(f[:2, :2], [[1.0, DT], [0.0, 1.0]])
    np.testing.assert_array_equal(h @ np.arange(6.0), [0.0, 2.0, 4.0])


def test_full_filter_reproduces_filterpy_state_and_covariance() -> None:
    # reference: filterpy.kalman.KalmanFilter (R. Labbe, filterpy 1.4), one per robot,
    # predict() every tick and update(z) at each fix, Joseph-form update like ours
    n = 3
    truth, readings = _fixes(n, 400, np.random.default_rng(41))
    est = ESTIMATORS.get("kalman")(mode="full", **KW, **context())
    est.reset(truth[0], n)
    f, q, h = cv_model(DT, 0.8, 1.5)
    refs = []
    for i in range(n):
        kf = KalmanFilter(dim_x=6, dim_z=3)
        kf.F, kf.Q, kf.H, kf.R = f, q, h, np.diag(SIGMA**2)
        kf.x = np.zeros((6, 1))
        kf.x[[0, 2, 4], 0] = truth[0][i]
        kf.P = 1e-8 * np.eye(6)
        refs.append(kf)
    updates = 0
    for rd in readings:
        out = est.update(rd.t, rd)
        for i, kf in enumerate(refs):
            kf.predict()
            if rd.fix_valid[i]:
                kf.update(rd.fix[i][:, None])
                updates += 1
            np.testing.assert_allclose(est._cv.state[i], kf.x[:, 0], rtol=0, atol=1e-10)
            np.testing.assert_allclose(est._cv._kf.p[i], kf.P, rtol=0, atol=1e-10)
            np.testing.assert_allclose(out[i], kf.x[[0, 2, 4], 0], rtol=0, atol=1e-10)
    assert updates > 40
    # the velocity states found the robots' speeds (0.5, 0.6, 0.7 m/s)
    speed = np.hypot(est._cv.state[:, 1], est._cv.state[:, 3])
    assert np.mean(np.abs(speed - [0.5, 0.6, 0.7])) < 0.15  # measured 0.07 (2 s of 2 cm fixes)


def test_steady_gain_is_the_dare_over_the_fix_period_and_dlqe() -> None:
    # fixes every M = 20 ticks: the gain at a fix is the DARE gain of F^M, Q_M = sum F^i Q F^i'
    # (scipy.linalg.solve_discrete_are) and python-control dlqe(F^M, I, H, Q_M, R) gives the
    # predictor gain F^M K with the same Riccati solution (python-control 0.10)
    est = ESTIMATORS.get("kalman")(mode="steady", **KW, **context())
    f, q, h = cv_model(DT, 0.8, 1.5)
    r = np.diag(SIGMA**2)
    fm = np.linalg.matrix_power(f, 20)
    qm = sum(np.linalg.matrix_power(f, i) @ q @ np.linalg.matrix_power(f, i).T for i in range(20))
    p = scipy.linalg.solve_discrete_are(fm.T, h.T, qm, r)
    k = p @ h.T @ np.linalg.inv(h @ p @ h.T + r)
    np.testing.assert_allclose(est._cv.gain, k, rtol=1e-9, atol=1e-12)
    l_ref, p_ref, _ = control.dlqe(fm, np.eye(6), h, qm, r)
    np.testing.assert_allclose(fm @ est._cv.gain, l_ref, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(p, p_ref, rtol=1e-7, atol=1e-14)
    # the full filter's gain at a late fix has settled on it
    truth, readings = _fixes(1, 2001, np.random.default_rng(42))
    for rd in readings:
        rd.fix_valid[:] = rd.t > 0 and round(rd.t / DT) % 20 == 0
        rd.fix = np.where(rd.fix_valid[:, None], truth[round(rd.t / DT)], np.nan)
    full = ESTIMATORS.get("kalman")(mode="full", **KW, **context())
    full.reset(truth[0], 1)
    for rd in readings[:-1]:
        full.update(rd.t, rd)
    kf = full._cv._kf
    prior = f @ kf.p[0] @ f.T + q  # the prior at the next tick, 2000, a fix tick
    k_full = prior @ h.T @ np.linalg.inv(h @ prior @ h.T + r)
    np.testing.assert_allclose(k_full, k, rtol=1e-9, atol=1e-12)
