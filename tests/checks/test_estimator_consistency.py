"""Filter consistency by the normalised estimation error squared (NEES) on synthetic data
drawn from each filter's own model (the bundled-scenario checks are in
test_estimators_on_bundled_scenarios.py, global localisation in test_particle_global.py).

NEES test (Bar-Shalom, Li, Kirubarajan, *Estimation with Applications to Tracking and
Navigation*, 2001, §5.4.2): with M Monte Carlo runs of a consistent filter of an n-state,
M times the run-averaged NEES is chi-square with M n degrees of freedom, so the average lies
in ``chi2.ppf([0.025, 0.975], M n) / M`` with 95 % probability (scipy.stats.chi2). We test
the average over ticks of that run average; a time average varies less than one tick's, so
the interval is the looser side of the exact one.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
from scipy.stats import chi2

from planners.estimators import ESTIMATORS
from planners.readings import Readings
from planners.se2 import compose, exp, wrap
from tests.planners.test_estimator_fixtures import CPR, DT, context

RUNS = 200


def _bounds(m: int, n: int) -> tuple[float, float]:
    lo, hi = chi2.ppf([0.025, 0.975], m * n) / m
    return float(lo), float(hi)


def _nees(err: np.ndarray, cov: np.ndarray) -> np.ndarray:
    return np.einsum("ni,ni->n", err, np.linalg.solve(cov, err[..., None])[..., 0])


def _matched_drive(seed: int):
    """Robots whose odometry errors are drawn from the EKF's own process model; late fixes."""
    kd, kt, kh = 0.01, 0.01, 0.005
    lag, every, sig = 10, 20, np.array([0.02, 0.02, 0.02])
    rng = np.random.default_rng(seed)
    inverse = context()["geometry"].inverse_matrix
    pose = np.tile([[1.0, 1.0, 0.3]], (RUNS, 1))
    angle, hist = np.zeros((RUNS, 2)), [pose.copy()]
    for k in range(1000):
        t = k * DT
        if k:
            twist = np.column_stack([
                np.full(RUNS, 0.8), np.zeros(RUNS), 0.9 * np.sin(0.7 * t + np.arange(RUNS)),
            ]) * DT
            meas = twist.copy()
            d = np.abs(twist[:, 0])
            meas[:, 0] += rng.standard_normal(RUNS) * kd * np.sqrt(d)
            meas[:, 2] += rng.standard_normal(RUNS) * np.sqrt(kt**2 * np.abs(twist[:, 2]) + kh**2 * d)
            pose = compose(pose, exp(twist))
            angle = angle + meas @ inverse.T
            hist.append(pose.copy())
        valid = np.full(RUNS, k % every == 0 and k >= lag)
        fix = hist[k - lag] + rng.standard_normal((RUNS, 3)) * sig if valid.any() else np.full((RUNS, 3), np.nan)
        yield pose, Readings(
            t=t, encoder_counts=angle * CPR / (2 * np.pi), fix=fix, fix_valid=valid,
            fix_time=np.where(valid, t - lag * DT, np.nan), fix_sigma=sig,
        )


def test_ekf_consistent_when_its_model_is_true() -> None:
    # data drawn from the filter's own model: the prediction Jacobians, the Joseph-form
    # update and the replay of late fixes must give NEES ~ chi-square (3 dof)
    est = ESTIMATORS.get("ekf")(
        distance_noise=0.01, turn_noise=0.01, drift_noise=0.005, lateral_noise=0.0,
        floor_xy=1e-5, floor_heading=1e-5, history=0.2, **context(),
    )
    est.reset(np.tile([[1.0, 1.0, 0.3]], (RUNS, 1)), RUNS)
    per_tick = []
    for truth, r in _matched_drive(71):
        err = est.update(r.t, r) - truth
        err[:, 2] = wrap(err[:, 2])
        per_tick.append(_nees(err, est.covariance).mean())
    ens = np.array(per_tick[50:])  # after the first fixes (the start covariance is ~0)
    lo, hi = _bounds(RUNS, 3)  # 2.67, 3.35; measured 3.26 (seeds 7, 1, 2, 3: 3.07 3.20 3.05 2.80)
    assert lo < ens.mean() < hi
    # no stretch of time far off: the per-tick averages are correlated from tick to tick, so
    # their share inside the interval is no 95 % statistic (measured 66-98 % over five seeds);
    # a band of +-1/3 around n = 3 is common practice, no source (measured 2.25-3.54)
    assert 2.0 < ens.min() and ens.max() < 4.0


def test_kalman_heading_consistent_when_its_model_is_true() -> None:
    # heading/bias filter (1-dof NEES on the heading) with a gyro of white noise and a
    # random-walk bias, and heading fixes: the model of planners/estimators/kalman.py
    gyro_sigma, bias_walk, bias_sigma, sig = 0.05, 2e-3, 0.01, 0.02
    sensors = context()["sensors"]
    sensors.fixes = SimpleNamespace(rate=10.0, sigma_xy=0.02, sigma_heading=sig, latency=0.0)
    est = ESTIMATORS.get("kalman")(
        gyro_sigma=gyro_sigma, bias_walk=bias_walk, bias_sigma=bias_sigma,
        **{**context(), "sensors": sensors},
    )
    rng = np.random.default_rng(72)
    heading, bias = np.zeros(RUNS), rng.standard_normal(RUNS) * bias_sigma
    est.reset(np.zeros((RUNS, 3)), RUNS)
    q = []
    for k in range(1, 2000):
        t = k * DT
        rate = 0.8 * np.sin(0.5 * t + np.arange(RUNS))
        heading = heading + rate * DT
        bias = bias + bias_walk * np.sqrt(DT) * rng.standard_normal(RUNS)
        valid = np.full(RUNS, k % 20 == 0)
        fix = np.full((RUNS, 3), np.nan)
        if valid.any():
            fix = np.column_stack([np.zeros((RUNS, 2)), heading + sig * rng.standard_normal(RUNS)])
        r = Readings(
            t=t, encoder_counts=np.zeros((RUNS, 2)), imu_valid=np.ones(RUNS, bool),
            gyro_rate=rate + bias + gyro_sigma * rng.standard_normal(RUNS),
            gyro_interval=np.full(RUNS, DT), fix=fix, fix_valid=valid,
            fix_time=np.where(valid, t, np.nan), fix_sigma=np.array([0.02, 0.02, sig]),
        )
        err = wrap(est.update(t, r)[:, 2] - heading)
        q.append(np.mean(err**2 / est.heading_variance))
    lo, hi = _bounds(RUNS, 1)  # 0.81, 1.21; measured 0.92
    assert lo < np.mean(q[100:]) < hi


def test_gyro_heading_variance_grows_as_angle_random_walk() -> None:
    # with an "+imu" source the heading variance of a straight drive without fixes is N^2 t
    # (IEEE Std 952-1997, angle random walk), not the wheel drift term
    n_density = 0.003  # rad/s/sqrt(Hz)
    ctx = context(fixes=False)
    ctx["sensors"].imu = SimpleNamespace(rate_noise=n_density)
    est = ESTIMATORS.get("ekf")(
        source="encoders+imu", turn_noise=0.0, drift_noise=0.5, floor_heading=0.0, **ctx
    )
    est.reset(np.zeros((1, 3)), 1)
    wheel = 0.5 * DT / 0.05  # 0.5 m/s on 5 cm wheels, both wheels [rad per tick]
    ticks = 400
    for k in range(ticks + 1):
        counts = np.full((1, 2), k * wheel * CPR / (2 * np.pi))
        est.update(k * DT, Readings(
            t=k * DT, encoder_counts=counts, gyro_rate=np.zeros(1), imu_valid=np.ones(1, bool),
            gyro_interval=np.full(1, DT if k else 0.0),
        ))
    start = 1e-8  # the EKF's start variance
    expected = start + n_density**2 * (ticks + 1) * DT
    np.testing.assert_allclose(est.covariance[0, 2, 2], expected, rtol=1e-9)
