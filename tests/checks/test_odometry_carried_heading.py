"""The odometry's carried heading cosine and sine against libm (numpy's cos, sin).

The odometry turns each robot's (cos h, sin h) by every step's (cos t, sin t) from the arc
series instead of calling cos and sin of the heading (planners/odometry_kernels.py); these
checks hold it to libm over long runs of small steps and across the large steps that take
the libm path. Reference: the angle-sum identities cos(h + t) = cos h cos t - sin h sin t,
sin(h + t) = sin h cos t + cos h sin t (any trigonometry text; common practice, no source),
evaluated by numpy's cos and sin of the odometry's own wrapped heading.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from planners.odometry import Odometry
from planners.readings import Readings
from planners.se2 import SERIES_MAX

R, B = 0.05, 0.32
DIFF_F = R * np.array([[0.5, 0.5], [0.0, 0.0], [-1 / B, 1 / B]])  # left, right wheel
DIFF_H = np.array([[1, 0, -B / 2], [1, 0, B / 2]]) / R


def carried_error(odo: Odometry) -> float:
    h = odo.pose[:, 2]
    assert np.all((h > -np.pi) & (h <= np.pi))
    cs = odo._cs  # the kernel's state: (2, N) cos, sin of each heading
    return float(np.max(np.abs(cs - np.stack([np.cos(h), np.sin(h)]))))


def wheel_counts(turns: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Cumulative wheel angles (T + 1, N, 2) [rad] for per-tick turns (T, N) [rad]."""
    forward = rng.uniform(-0.05, 0.05, turns.shape)
    steps = np.stack([forward, np.zeros_like(forward), turns], axis=-1) @ DIFF_H.T
    return np.concatenate([np.zeros((1,) + steps.shape[1:]), np.cumsum(steps, axis=0)])


def lynch_park_pose(pose0: np.ndarray, counts: np.ndarray) -> np.ndarray:
    # pose <- pose * exp(xi) with libm cos, sin of the heading at every step
    # (Lynch & Park, Modern Robotics, 2017, §13.4, eqs. 13.35-13.36)
    x, y, h = pose0
    for d in np.diff(counts, axis=0):
        vx, _, w = DIFF_F @ d
        dx, dy = (vx * math.sin(w) / w, vx * (1 - math.cos(w)) / w) if w else (vx, 0.0)
        c, s = math.cos(h), math.sin(h)
        x, y, h = x + c * dx - s * dy, y + s * dx + c * dy, h + w
    return np.array([x, y, h])


def test_carried_cos_sin_after_100000_small_steps():
    rng = np.random.default_rng(np.random.SeedSequence(20240611))
    n, ticks = 3, 100_000
    # turns of every size the series path takes, both ways, biased one way for robot 0
    turns = rng.uniform(-SERIES_MAX, SERIES_MAX, (ticks, n))
    turns[:, 0] = np.abs(turns[:, 0]) * 0.01
    counts = wheel_counts(turns, rng)
    pose0 = np.array([[0.2, -0.1, 3.0], [1.0, 2.0, -3.1], [0.0, 0.0, 0.0]])
    odo = Odometry(source="encoders", forward=DIFF_F, counts_per_rev=2 * np.pi)
    odo.reset(pose0)
    worst = 0.0
    for k in range(ticks + 1):
        odo.update(Readings(t=0.01 * k, encoder_counts=counts[k]), copy=False)
        if k % 10_000 == 0:
            worst = max(worst, carried_error(odo))
    assert worst <= 1e-12
    # and they stay on the unit circle within two units in the last place of 1 (the
    # renormalisation; without it the length wanders by some 3e-14 here)
    assert np.max(np.abs(np.hypot(*odo._cs) - 1.0)) <= 2 * np.finfo(float).eps
    # the positions they turn agree with libm's step by step (2000 ticks, robot 1)
    short = Odometry(source="encoders", forward=DIFF_F, counts_per_rev=2 * np.pi)
    short.reset(pose0[1:2])
    for k in range(2001):
        est = short.update(Readings(t=0.01 * k, encoder_counts=counts[k, 1:2]))
    ref = lynch_park_pose(pose0[1], counts[:2001, 1])
    assert est[0, :2] == pytest.approx(ref[:2], abs=1e-11)


def test_carried_cos_sin_across_large_steps_and_imu_heading():
    rng = np.random.default_rng(np.random.SeedSequence(7))
    n, ticks = 11, 20_000
    turns = rng.uniform(-SERIES_MAX, SERIES_MAX, (ticks, n))
    big = rng.random((ticks, n)) < 0.05
    turns[big] = rng.uniform(-9.0, 9.0, int(big.sum()))  # past SERIES_MAX and past pi
    counts = wheel_counts(turns, rng)
    pose0 = np.column_stack([np.zeros((n, 2)), rng.uniform(-7, 7, n)])  # some unwrapped
    for source in ("encoders", "encoders+imu"):
        odo = Odometry(source=source, forward=DIFF_F, counts_per_rev=2 * np.pi)
        odo.reset(pose0)
        assert carried_error(odo) <= 1e-15
        worst = 0.0
        for k in range(ticks + 1):
            valid = np.full(n, k > 0 and k % 3 == 0)
            odo.update(Readings(
                t=0.01 * k, encoder_counts=counts[k], imu_valid=valid,
                gyro_rate=np.where(valid, 0.7, np.nan), gyro_interval=np.where(valid, 0.03, 0.0),
            ), copy=False)
            if k % 1000 == 0:
                worst = max(worst, carried_error(odo))
        assert worst <= 1e-12, source

