"""The first-order low-pass against its closed forms, its lag, and the -3 dB rule of thumb."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from planners.errors import ScenarioError
from planners.estimators import ESTIMATORS
from planners.filters import LowPass, lowpass_coefficient, lowpass_lag
from tests.planners.test_estimator_fixtures import context, drive

T = 0.005


def _run(a: float, x: np.ndarray, y0: float = 0.0) -> np.ndarray:
    f = LowPass(a=a)
    f.reset(np.full((1, 1), y0))
    return np.array([f.update(np.full((1, 1), v))[0, 0] for v in x])


@pytest.mark.parametrize("a", [0.5, 0.9, lowpass_coefficient(2.0, T)])
def test_step_response_is_one_minus_a_to_the_n(a: float) -> None:
    # y_n = (1 - a) sum_{k<n} a^k = 1 - a^n (geometric series; common practice, no source)
    y = _run(a, np.ones(60))
    n = np.arange(1, 61)
    np.testing.assert_allclose(y, 1.0 - a**n, rtol=0, atol=1e-14)


@pytest.mark.parametrize("fc", [0.5, 1.0, 2.0, 5.0])
def test_minus_3_db_point_is_the_cutoff(fc: float) -> None:
    # a = exp(-2 pi fc T) puts the -3 dB point at fc to within 2 % for fc << 1/T
    # (common practice, no source: the z = exp(sT) image of the RC pole 1 / (2 pi fc))
    a = lowpass_coefficient(fc, T)
    freqs = np.linspace(0.01, 20.0, 200001)
    _, resp = scipy.signal.freqz([1.0 - a], [1.0, -a], worN=freqs, fs=1.0 / T)
    f3 = freqs[np.argmax(np.abs(resp) < 1.0 / np.sqrt(2.0))]
    assert abs(f3 / fc - 1.0) < 0.02
    # measured: a sine at fc through LowPass comes out at 1/sqrt(2) of its amplitude (2 %)
    k = np.arange(int(20.0 / fc / T))
    y = _run(a, np.sin(2 * np.pi * fc * k * T))
    amplitude = np.abs(y[len(y) // 2 :]).max()
    assert abs(amplitude * np.sqrt(2.0) - 1.0) < 0.02


def test_larger_a_smooths_more_but_responds_slower() -> None:
    rng = np.random.default_rng(21)
    noise = rng.normal(0.0, 1.0, 20000)
    stds, settle_up, settle_down = [], [], []
    for a in (0.5, 0.8, 0.95):
        y = _run(a, noise)
        stds.append(y[100:].std())
        # white noise of unit variance: output variance (1 - a) / (1 + a)
        # (common practice, no source: sum of (1 - a)^2 a^(2k))
        assert y[100:].var() == pytest.approx((1 - a) / (1 + a), rel=0.05)
        up = _run(a, np.ones(400), 0.0)
        down = _run(a, np.zeros(400), 1.0)
        settle_up.append(int(np.argmax(up >= 0.9)))
        settle_down.append(int(np.argmax(down <= 0.1)))
    assert stds[0] > stds[1] > stds[2]
    assert settle_up[0] < settle_up[1] < settle_up[2]
    assert settle_down == settle_up  # linear filter: the same in both directions
    # first n with a^n <= 0.1 is ceil(ln 0.1 / ln a); zero-based index one less
    assert settle_up == [int(np.ceil(np.log(0.1) / np.log(a))) - 1 for a in (0.5, 0.8, 0.95)]


def test_lowpass_estimator_cutoff_trades_noise_for_response() -> None:
    # measured on the estimator: a lower cutoff leaves less fix noise in the estimate but
    # takes longer to remove a sudden 0.1 m offset of the odometry (a step disturbance)
    truth, readings = drive(1, 2400, np.random.default_rng(22), latency_ticks=0)
    for rd in readings[1200:]:
        # the robot is 0.1 m further than odometry says
        rd.fix = rd.fix + np.array([[0.1, 0.0, 0.0]])
        rd.truth = rd.truth + np.array([[0.1, 0.0, 0.0]])
    results = {}
    for fc in (0.2, 1.0):
        est = ESTIMATORS.get("lowpass")(cutoff=fc, **context())
        est.reset(truth[0], 1)
        out = np.array([est.update(rd.t, rd)[0] for rd in readings])
        err = out[:, 0] - np.array([rd.truth[0, 0] for rd in readings])
        jitter = err[600:1200].std()
        settle = int(np.argmax(np.abs(err[1200:]) < 0.02))
        results[fc] = (jitter, settle)
    assert results[0.2][0] < results[1.0][0]
    assert results[0.2][1] > results[1.0][1]


@pytest.mark.parametrize("a", [0.3, 0.8, lowpass_coefficient(1.0, T)])
def test_lag_is_the_group_delay_a_over_one_minus_a(a: float) -> None:
    # group delay of H(z) = (1 - a) / (1 - a z^-1) at low frequency is a / (1 - a) samples
    # (reference: scipy.signal.group_delay; derivation in planners.filters.lowpass_lag,
    # Franklin, Powell, Workman, Digital Control of Dynamic Systems, 1998, ch. 4)
    # at any w it is a (cos w - a) / (1 - 2 a cos w + a^2), which is a / (1 - a) at w = 0
    w, gd = scipy.signal.group_delay(([1.0 - a], [1.0, -a]), w=[1e-6, 0.01, 0.1, 1.0])
    closed = a * (np.cos(w) - a) / (1.0 - 2.0 * a * np.cos(w) + a * a)
    np.testing.assert_allclose(gd, closed, rtol=1e-6)
    assert gd[0] == pytest.approx(a / (1.0 - a), rel=1e-6)
    assert lowpass_lag(a, T) == pytest.approx(a / (1.0 - a) * T, rel=1e-15)
    assert LowPass(a=a).lag == pytest.approx(a / (1.0 - a), rel=1e-15)
    # measured: a ramp comes out a / (1 - a) samples late once the start has died away
    k = np.arange(3000.0)
    y = _run(a, k)
    np.testing.assert_allclose(k[-100:] - y[-100:], a / (1.0 - a), rtol=1e-9)


@pytest.mark.parametrize("fc", [0.2, 1.0, 5.0])
def test_lag_is_the_rc_time_constant_for_a_low_cutoff(fc: float) -> None:
    # a = exp(-x), x = 2 pi fc T: a / (1 - a) = 1 / (exp(x) - 1) = 1/x - 1/2 + x/12 - ..., so
    # the lag is the RC time constant 1 / (2 pi fc) less half a sample, plus x T / 12
    # (Laurent series of 1 / (e^x - 1), next term -x^3 / 720; common practice, no source)
    lag = lowpass_lag(lowpass_coefficient(fc, T), T)
    x = 2.0 * np.pi * fc * T
    assert lag == pytest.approx(1.0 / (2.0 * np.pi * fc) - T / 2.0 + x * T / 12.0, rel=max(x**4 / 100, 1e-12))
    assert lag == pytest.approx(1.0 / (2.0 * np.pi * fc), rel=0.1)  # the rule of thumb


def test_a_or_cutoff_exactly_one() -> None:
    assert LowPass(cutoff=2.0, dt=T).a == lowpass_coefficient(2.0, T)
    assert LowPass(a=0.25).a == 0.25
    with pytest.raises(ValueError, match="lowpass: give exactly one of a and cutoff"):
        LowPass(a=0.5, cutoff=1.0, dt=T)
    with pytest.raises(ValueError, match="lowpass: give exactly one of a and cutoff"):
        LowPass()
    with pytest.raises(ValueError, match="lowpass: cutoff needs the sample period dt"):
        LowPass(cutoff=1.0)
    with pytest.raises(ValueError, match=r"lowpass: a must be in \[0, 1\), got 1.0"):
        LowPass(a=1.0)
    with pytest.raises(ScenarioError, match="estimator.lowpass: a and cutoff must not both be given"):
        ESTIMATORS.get("lowpass")(a=0.5, cutoff=1.0, **context())
    est = ESTIMATORS.get("lowpass")(a=0.5, **context())
    assert est.a == 0.5 and est.lag == pytest.approx(0.1)  # fixes at 10 Hz: 1 sample late


def test_fix_smoothing_with_a_zero_holds_the_latest_fix() -> None:
    truth, readings = drive(2, 200, np.random.default_rng(23), latency_ticks=0)
    est = ESTIMATORS.get("lowpass")(a=0.0, smooth="fixes", **context())
    est.reset(truth[0], 2)
    held = truth[0].copy()
    for rd in readings:
        out = est.update(rd.t, rd)
        held = np.where(rd.fix_valid[:, None], rd.fix, held)
        np.testing.assert_allclose(out, held, rtol=0, atol=1e-15)


def test_wheel_speed_low_pass_passes_white_noise_variance_one_minus_a_over_one_plus_a() -> None:
    # the wheel loop's optional speed low-pass: with a P-only loop the duty is affine in the
    # measured speed, so measured white noise of variance s^2 leaves it with variance
    # kP^2 s^2 (1 - a) / (1 + a) / V^2 (sum of (1 - a)^2 a^(2k); common practice, no source)
    from planners.control import WheelController

    dt, fc, s, kp, v = 0.005, 5.0, 2.0, 0.3, 12.0
    rng = np.random.default_rng(24)
    noise = rng.normal(0.0, s, (20000, 1, 2))
    for cutoff in (None, fc):
        ctl = WheelController(wheels=2, dt=dt, voltage=v, kS=0.0, kV=0.02, kA=0.001, kP=kp, kI=0.0,
                              speed_cutoff=cutoff)
        ctl.reset(1)
        duty = np.array([ctl.duty(np.full((1, 2), 10.0), np.zeros((1, 2)), 10.0 + x, np.array([v]))
                         for x in noise])[200:, 0, 0]
        a = 0.0 if cutoff is None else lowpass_coefficient(fc, dt)
        assert duty.var() == pytest.approx((kp * s / v) ** 2 * (1 - a) / (1 + a), rel=0.05)
