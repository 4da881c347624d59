"""The first-order low-pass against its closed forms and the -3 dB rule of thumb."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from planners.estimators import ESTIMATORS
from planners.filters import LowPass, lowpass_coefficient
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
