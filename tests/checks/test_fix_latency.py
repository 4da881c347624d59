"""Absolute fixes with latency describe the past pose, not the present one.

Definition of sensor latency (common practice, no source): a measurement that arrives at
time t with latency L was taken at t - L and describes the state at t - L.
"""

from __future__ import annotations

import numpy as np
import pytest

from planners.se2 import compose, exp, wrap
from sim.config_sensors import Fixes, SensorSuite
from sim.field import Field, Landmark

DT, LATENCY, SPEED = 0.01, 0.12, 0.8


def workshop() -> Field:
    landmarks = tuple(
        Landmark(id=i + 1, at=at) for i, at in enumerate([(0.0, 2.0), (4.0, 2.0), (2.0, 0.0), (2.0, 4.0)])
    )
    return Field(
        name="workshop floor",
        boundary=np.array([[0, 0], [4, 0], [4, 4], [0, 4.0]]),
        landmarks=landmarks,
    )


def truth(t: float) -> np.ndarray:
    # a circle of radius 1 m about (2, 2), counter-clockwise at 0.8 m/s
    start = np.array([[3.0, 2.0, np.pi / 2]])
    return compose(start, exp(np.array([[SPEED, 0.0, SPEED]]) * t))


def test_fix_matches_the_pose_latency_ago_not_now():
    from sim.sensors import Sensors

    sensors = Sensors(
        SensorSuite(fixes=Fixes(rate=25.0, sigma_xy=0.0, sigma_heading=0.0, latency=LATENCY)),
        field=workshop(), wheel_count=2, dt=DT,
    )
    sensors.reset([np.random.default_rng(5)], truth(0.0))
    seen = 0
    for k in range(300):
        t = k * DT
        r = sensors.read(t, truth(t), np.zeros((1, 2)))
        if not r.fix_valid[0]:
            continue
        seen += 1
        then = truth(t - LATENCY)[0]
        assert r.fix_time[0] == pytest.approx(t - LATENCY, abs=1e-12)
        assert r.fix[0, :2] == pytest.approx(then[:2], abs=1e-12)
        assert wrap(r.fix[0, 2] - then[2]) == pytest.approx(0.0, abs=1e-12)
        # ... and not the pose now: 0.8 m/s for 0.12 s is a chord of about 9.6 cm
        assert np.hypot(*(r.fix[0, :2] - truth(t)[0, :2])) == pytest.approx(
            2 * np.sin(SPEED * LATENCY / 2), abs=1e-9
        )
    # 25 Hz over 3 s less the first 0.12 s: fixes at 0.12, 0.16, ..., 2.96 s
    assert seen == 72
