"""The heading Kalman filter against filterpy, scipy's DARE, python-control's dlqe, closed form."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg
from filterpy.kalman import KalmanFilter

import control
from planners.estimators import ESTIMATORS
from planners.filters import LinearKalman, periodic_gains, steady_gain
from tests.planners.test_estimator_fixtures import DT, context, drive

KW = dict(gyro_sigma=0.03, bias_walk=2e-3, bias_sigma=0.02)


def _model():
    f = np.array([[1.0, -DT], [0.0, 1.0]])
    b = np.array([[DT], [0.0]])
    q = np.diag([(KW["gyro_sigma"] * DT) ** 2, KW["bias_walk"] ** 2 * DT])
    h = np.array([[1.0, 0.0]])
    r = np.array([[0.02**2]])
    return f, b, q, h, r


def test_heading_filter_reproduces_filterpy() -> None:
    # reference: filterpy.kalman.KalmanFilter (R. Labbe, filterpy 1.4), predict(u) / update(z),
    # whose update uses the Joseph form as ours does
    truth, readings = drive(1, 400, np.random.default_rng(11))
    est = ESTIMATORS.get("kalman")(mode="full", measure="fixes", **KW, **context())
    est.reset(truth[0], 1)
    f, b, q, h, r = _model()
    kf = KalmanFilter(dim_x=2, dim_z=1, dim_u=1)
    kf.F, kf.B, kf.Q, kf.H, kf.R = f, b, q, h, r
    kf.x = np.array([[truth[0][0, 2]], [0.0]])
    kf.P = np.diag([0.0, KW["bias_sigma"] ** 2])
    updates = 0
    for rd in readings:
        out = est.update(rd.t, rd)
        kf.predict(u=np.array([[rd.gyro_rate[0]]]))
        if rd.fix_valid[0]:
            kf.update(np.array([[rd.fix[0, 2]]]))
            updates += 1
        assert abs(out[0, 2] - kf.x[0, 0]) < 1e-10
        np.testing.assert_allclose(est.heading_variance[0], kf.P[0, 0], rtol=0, atol=1e-10)
        np.testing.assert_allclose(est._kf.p[0], kf.P, rtol=0, atol=1e-10)
        np.testing.assert_allclose(est._kf.x[0], kf.x[:, 0], rtol=0, atol=1e-10)
    assert updates == 19  # ticks 20, 40, ..., 380


def test_linear_core_reproduces_filterpy_batched() -> None:
    # reference: filterpy.kalman.KalmanFilter on each of 3 rows, random data, some updates missing
    rng = np.random.default_rng(12)
    f, b, q, h, r = _model()
    core = LinearKalman(f=f, b=b, q=q, h=h, r=r)
    x0 = rng.normal(size=(3, 2))
    p0 = np.tile(np.diag([0.1, 0.01]), (3, 1, 1))
    core.reset(x0, p0)
    refs = []
    for i in range(3):
        kf = KalmanFilter(dim_x=2, dim_z=1, dim_u=1)
        kf.F, kf.B, kf.Q, kf.H, kf.R = f, b, q, h, r
        kf.x, kf.P = x0[i][:, None].copy(), p0[i].copy()
        refs.append(kf)
    for _ in range(200):
        u = rng.normal(size=(3, 1))
        z = rng.normal(size=(3, 1))
        mask = rng.random(3) < 0.3
        core.predict(u)
        core.update(z - core.x @ h.T, mask)
        for i, kf in enumerate(refs):
            kf.predict(u=u[i : i + 1])
            if mask[i]:
                kf.update(z[i : i + 1])
            np.testing.assert_allclose(core.x[i], kf.x[:, 0], rtol=0, atol=1e-10)
            np.testing.assert_allclose(core.p[i], kf.P, rtol=0, atol=1e-10)


def test_steady_gain_equals_scipy_dare_and_control_dlqe() -> None:
    f, _, q, h, r = _model()
    k, p = steady_gain(f, h, q, r)
    # reference: the filtering DARE P = F P F' - F P H'(H P H' + R)^-1 H P F' + Q holds
    res = f @ p @ f.T - f @ p @ h.T @ np.linalg.inv(h @ p @ h.T + r) @ h @ p @ f.T + q - p
    assert np.abs(res).max() < 1e-14
    # reference: python-control dlqe(A, G, C, QN, RN) (python-control 0.10) returns the
    # predictor gain L = A P C'(C P C' + R)^-1, i.e. F K, and the same Riccati solution P
    l_ref, p_ref, _ = control.dlqe(f, np.eye(2), h, q, r)
    np.testing.assert_allclose(p, p_ref, rtol=1e-9, atol=0)
    np.testing.assert_allclose(f @ k, l_ref, rtol=1e-9, atol=0)
    # the time-varying filter, measured every tick, converges to the same gain
    core = LinearKalman(f=f, b=np.zeros((2, 1)), q=q, h=h, r=r)
    core.reset(np.zeros((1, 2)), np.eye(2)[None])
    for _ in range(20000):
        core.predict(np.zeros((1, 1)))
        prior = core.p[0].copy()
        core.update(np.zeros((1, 1)), np.ones(1, bool))
    np.testing.assert_allclose(prior, p, rtol=1e-6)


@pytest.mark.parametrize(("q", "r"), [(1e-4, 1e-2), (1.0, 1.0), (0.3, 2e-3)])
def test_scalar_random_walk_closed_form(q: float, r: float) -> None:
    # scalar random walk x' = x + w (var q), z = x + v (var r): the DARE reduces to
    # P^2 = q (P + r), so the prior variance is P = (q + sqrt(q^2 + 4 q r)) / 2 and the gain
    # K = P / (P + r)  (common practice: the scalar Riccati equation solved by hand; e.g.
    # Simon, *Optimal State Estimation*, 2006, ch. 7 on steady-state filtering, value from memory)
    k, p = steady_gain(np.eye(1), np.eye(1), np.array([[q]]), np.array([[r]]))
    p_ref = (q + np.sqrt(q * q + 4.0 * q * r)) / 2.0
    assert p[0, 0] == pytest.approx(p_ref, rel=1e-12)
    assert k[0, 0] == pytest.approx(p_ref / (p_ref + r), rel=1e-12)


def test_steady_fix_gain_is_the_dare_of_the_model_over_the_fix_period() -> None:
    # fixes every M = 20 ticks (10 Hz at 200 Hz): between two fixes the model is F^M with
    # Q_M = sum F^i Q F^i'; the steady fix gain is that lifted model's DARE gain
    # (reference: scipy.linalg.solve_discrete_are, and python-control dlqe(F^M, I, H, Q_M, R)
    # whose predictor gain is F^M K), not the one-tick DARE gain (about 7 times smaller here)
    truth, readings = drive(1, 400, np.random.default_rng(13))
    est = ESTIMATORS.get("kalman")(mode="steady", measure="fixes", **KW, **context())
    f, _, q, h, r = _model()
    fm = np.linalg.matrix_power(f, 20)
    qm = sum(np.linalg.matrix_power(f, i) @ q @ np.linalg.matrix_power(f, i).T for i in range(20))
    p = scipy.linalg.solve_discrete_are(fm.T, h.T, qm, r)
    k_ref = p @ h.T @ np.linalg.inv(h @ p @ h.T + r)
    np.testing.assert_allclose(est._gains["fixes"], k_ref, rtol=1e-10)
    l_ref, p_ref, _ = control.dlqe(fm, np.eye(2), h, qm, r)
    np.testing.assert_allclose(fm @ est._gains["fixes"], l_ref, rtol=1e-8)
    assert est._gains["fixes"][0, 0] > 5.0 * steady_gain(f, h, q, r)[0][0, 0]
    est.reset(truth[0], 1)
    out = np.array([est.update(rd.t, rd) for rd in readings])
    assert np.abs(out[:, 0, 2] - truth[:, 0, 2]).max() < 0.05


def test_periodic_gains_equal_the_settled_time_varying_filter() -> None:
    # odometry heading every tick and fixes every 20th: the periodic steady state, found by
    # lifting one period (planners.filters.periodic_gains), must be where the time-varying
    # filter settles (the recursion verified against filterpy above); Simon, Optimal State
    # Estimation, 2006, ch. 7 (steady state) and §7.1 (correlated noise of the lifted model)
    f, _, q, h, r_fix = _model()
    r_odo = np.array([[0.05**2]])
    schedule = [[(h, r_odo), (h, r_fix)]] + [[(h, r_odo)] for _ in range(19)]
    prior, gains = periodic_gains(f, q, schedule)
    p = np.eye(2)
    for period in range(4000):
        for j, tick in enumerate(schedule):
            p = f @ p @ f.T + q
            if j == 0:
                settled_prior = p.copy()
            for m, (hh, rr) in enumerate(tick):
                k = p @ hh.T @ np.linalg.inv(hh @ p @ hh.T + rr)
                if period == 3999:
                    np.testing.assert_allclose(k, gains[j][m], rtol=1e-9)
                a = np.eye(2) - k @ hh
                p = a @ p @ a.T + k @ rr @ k.T
    np.testing.assert_allclose(prior, settled_prior, rtol=1e-9)
