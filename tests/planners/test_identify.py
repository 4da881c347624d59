"""Feedforward identification: the least-squares fit, its intervals and the log pipeline."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats

from planners.errors import LogError, ScenarioError
from planners.identify import Smoother, design_matrix, fit_constants, fit_feedforward
from planners.robot_log import RobotLog, read_log
from tests.planners.ff_logs import DT, KA, KS, KV, STEPS, write_ff_log

TRUTH = np.array([KS, KV, KA])


def _regressors(rng, n):
    v = rng.uniform(2.0, 20.0, n) * rng.choice([-1.0, 1.0], n)
    a = rng.normal(0.0, 60.0, n)
    return v, a


def test_fit_equals_numpy_lstsq_on_the_same_design_matrix():
    # reference: numpy.linalg.lstsq (LAPACK gelsd, SVD) against our QR solve
    rng = np.random.default_rng(7)
    v, a = _regressors(rng, 500)
    u = design_matrix(v, a) @ TRUTH + rng.normal(0.0, 0.05, 500)
    fit = fit_constants(u, v, a)
    x = design_matrix(v, a)
    ref, rss, _, _ = np.linalg.lstsq(x, u, rcond=None)
    np.testing.assert_allclose(fit.coef, ref, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(fit.residuals @ fit.residuals, rss[0], rtol=1e-10)
    # covariance sigma^2 (X'X)^-1 (Montgomery, Peck & Vining 2012, §3.3), formed directly
    cov = rss[0] / (500 - 3) * np.linalg.inv(x.T @ x)
    np.testing.assert_allclose(fit.cov, cov, rtol=1e-9)
    assert fit.r2 == pytest.approx(1.0 - rss[0] / np.sum((u - u.mean()) ** 2), rel=1e-12)


def test_known_constants_are_recovered_from_noisy_data():
    rng = np.random.default_rng(11)
    v, a = _regressors(rng, 2000)
    u = design_matrix(v, a) @ TRUTH + rng.normal(0.0, 0.05, 2000)
    fit = fit_constants(u, v, a)
    assert np.all(np.abs(fit.coef - TRUTH) < 4.0 * fit.se)
    np.testing.assert_allclose(fit.coef, TRUTH, rtol=0.02)
    assert fit.ka_separable and fit.n == 2000


def test_95_percent_intervals_cover_the_truth_in_95_percent_of_400_trials():
    # interval: estimate +- t_{0.975, n-3} SE (Student t, scipy.stats.t); the count of covering
    # trials is Binomial(400, 0.95) when the SEs are right: accept its central 99.9 % range
    trials, n = 400, 30
    rng = np.random.default_rng(np.random.SeedSequence(2024))
    q = scipy.stats.t.ppf(0.975, n - 3)
    hits = np.zeros(3, dtype=int)
    for _ in range(trials):
        v, a = _regressors(rng, n)
        u = design_matrix(v, a) @ TRUTH + rng.normal(0.0, 0.2, n)
        fit = fit_constants(u, v, a)
        hits += np.abs(fit.coef - TRUTH) <= q * fit.se
    lo, hi = scipy.stats.binom.interval(0.999, trials, 0.95)
    assert np.all((hits >= lo) & (hits <= hi)), (hits, lo, hi)


def test_step_log_gives_the_constants_and_no_warning(tmp_path):
    fit = fit_feedforward(read_log(write_ff_log(tmp_path / "steps.csv", STEPS)))
    assert fit.wheels.keys() == {"left", "right"} and fit.signal == "position"
    for f in (fit.pooled, fit.wheels["left"].fit):
        np.testing.assert_allclose(f.coef, TRUTH, rtol=0.01)
        assert f.ka_separable and f.r2 > 0.999
    assert fit.pooled.n == 2 * fit.wheels["left"].fit.n
    assert fit.window_samples == 31  # 0.15 s at 5 ms


def test_constant_speed_log_cannot_separate_ka(tmp_path):
    # cruising at one speed: the acceleration column is encoder noise only
    vss = (6.0 - KS) / KV
    log = read_log(write_ff_log(tmp_path / "cruise.csv", [(4.0, 6.0)], v0=vss, noise=0.5, volt_noise=0.02))
    fit = fit_feedforward(log)
    assert not fit.pooled.ka_separable
    assert not fit.wheels["left"].fit.ka_separable
    assert not fit.pooled.kA_se <= 0.2 * abs(fit.pooled.kA)
    # the same noise on the step test leaves kA well determined
    steps = fit_feedforward(read_log(write_ff_log(tmp_path / "steps.csv", STEPS, noise=0.5, volt_noise=0.02)))
    assert steps.pooled.ka_separable and steps.pooled.kA_se < 0.05 * steps.pooled.kA


def test_logged_velocity_is_used_when_present(tmp_path):
    fit = fit_feedforward(read_log(write_ff_log(tmp_path / "vel.csv", STEPS, velocity=True)))
    assert fit.signal == "velocity"
    np.testing.assert_allclose(fit.pooled.coef, TRUTH, rtol=0.01)


def test_jittered_time_is_resampled_and_still_fits(tmp_path):
    n = round(sum(d for d, _ in STEPS) / DT)
    # control ticks up to 20 % of a period late, each row logged at its own tick
    t = DT * np.arange(n) + np.random.default_rng(3).uniform(0.0, 0.2 * DT, n)
    fit = fit_feedforward(read_log(write_ff_log(tmp_path / "jitter.csv", STEPS, t=t)))
    assert any("resampled" in note for note in fit.notes)
    np.testing.assert_allclose(fit.pooled.coef, TRUTH, rtol=0.01)


def test_smoother_window_in_samples_is_odd_and_long_enough():
    assert Smoother(window=0.15, order=4).samples(0.005) == 31
    assert Smoother(window=0.1, order=4).samples(0.005) == 21
    assert Smoother(window=0.01, order=4).samples(0.005) == 7
    with pytest.raises(ScenarioError, match=r"smoother: window must be > 0 s, got -0.1"):
        Smoother(window=-0.1)
    with pytest.raises(ScenarioError, match=r"smoother: order must be an integer >= 2 .*, got 1"):
        Smoother(order=1)


def test_bad_inputs_raise_log_errors(tmp_path):
    with pytest.raises(LogError, match="needs at least 4 samples"):
        fit_constants(np.ones(3), np.ones(3), np.ones(3))
    with pytest.raises(LogError, match="linearly dependent"):
        fit_constants(np.arange(10.0), np.full(10, 2.0), np.arange(10.0))
    log = read_log(write_ff_log(tmp_path / "steps.csv", STEPS))
    with pytest.raises(LogError, match=r"wheel must be one of left, right, got 'fl'"):
        fit_feedforward(log, wheels=("fl",))
    t = log.t.copy()
    t[100:] += 3.5 * DT
    holes = RobotLog(source="holes.csv", t=t, wheels=log.wheels, columns=log.columns, rows=log.rows)
    with pytest.raises(LogError, match=r"holes.csv: row \d+: step of 0.0225 s .* more than 3 x the median"):
        fit_feedforward(holes)
    short = read_log(write_ff_log(tmp_path / "short.csv", [(0.3, 3.0)]))
    with pytest.raises(LogError, match="60 usable samples; the 0.15 s smoothing window needs at least 93"):
        fit_feedforward(short)
    still = {name: np.full_like(log.t, 0.5 if name.startswith("voltage") else 0.0) for name in log.columns}
    stuck = RobotLog(source="stuck.csv", t=log.t, wheels=log.wheels, columns=still, rows=log.rows)
    with pytest.raises(LogError, match=r"stuck.csv: wheel 'left': feedforward fit: sign\(v\), v and a are linearly"):
        fit_feedforward(stuck)  # 0.5 V never breaks the wheel free
    none = RobotLog(source="none.csv", t=log.t, wheels=(), columns={})
    with pytest.raises(LogError, match="none.csv: needs wheel columns"):
        fit_feedforward(none)
