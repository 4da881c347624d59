"""Synthetic drives and duck-typed sensor contexts for the estimator tests (no sim import)."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from planners.kinematics import ChassisGeometry
from planners.raycast import expected_ranges
from planners.readings import Readings
from planners.se2 import compose, exp

DT = 0.005
CPR = 2048.0
#: walls of a box from (-3, -3) to (5, 4) with a pillar, for the range sensors
WALLS = np.array([
    [-3, -3, 5, -3], [5, -3, 5, 4], [5, 4, -3, 4], [-3, 4, -3, -3],
    [2, 1, 2.5, 1], [2.5, 1, 2.5, 1.5], [2.5, 1.5, 2, 1.5], [2, 1.5, 2, 1],
], dtype=float)
#: range sensors x, y, direction (body frame), 4 m, 1 cm
MOUNTS = np.array([[0.1, 0.0, 0.0], [0.0, 0.1, np.pi / 2], [0.0, -0.1, -np.pi / 2]])


def context(*, fixes: bool = True, imu: bool = True, ranges: bool = False) -> dict:
    """Runner context of a differential robot with encoders (and IMU, fixes, range sensors)."""
    geometry = ChassisGeometry(
        kind="differential", wheel_radius=0.05, track=0.3, wheelbase=0.0, wheels=2
    )
    sensors = SimpleNamespace(
        encoders=SimpleNamespace(counts_per_rev=CPR),
        pods=(),
        imu=SimpleNamespace() if imu else None,
        fixes=(
            SimpleNamespace(rate=10.0, sigma_xy=0.02, sigma_heading=0.02, latency=0.05)
            if fixes
            else None
        ),
        range=tuple(
            SimpleNamespace(at=(m[0], m[1]), direction=m[2], max_range=4.0, sigma=0.01)
            for m in MOUNTS
        ) if ranges else (),
    )
    field = SimpleNamespace(segments=WALLS if ranges else np.zeros((0, 4)), landmark_xy=np.zeros((0, 2)))
    return dict(geometry=geometry, sensors=sensors, field=field, dt=DT)


def drive(
    n: int, ticks: int, rng: np.random.Generator, *, latency_ticks: int = 10
) -> tuple[np.ndarray, list[Readings]]:
    """Truth (T, N, 3) and readings of N robots driving arcs of different speed and turn.

    Range readings of :data:`MOUNTS` against :data:`WALLS` come every 8th tick (1 cm noise,
    ``inf`` beyond 4 m); estimators use them only with a ``context(ranges=True)``.
    """
    geometry = context()["geometry"]
    v = 0.4 + 0.1 * np.arange(n)
    w = 0.5 - 0.2 * np.arange(n)
    twist = np.column_stack([v, np.zeros(n), w])
    wheel_rate = twist @ geometry.inverse_matrix.T
    pose = np.tile([[0.5, 0.2, 0.1]], (n, 1))
    truth, out = [], []
    angle = np.zeros((n, 2))
    for k in range(ticks):
        t = k * DT
        if k:
            pose = compose(pose, exp(twist * DT))
            angle = angle + wheel_rate * DT
        truth.append(pose.copy())
        fix_valid = np.full(n, k % 20 == 0 and k >= latency_ticks)
        fix = np.full((n, 3), np.nan)
        if fix_valid.any():
            fix = truth[k - latency_ticks] + rng.normal(0.0, 0.02, (n, 3))
        out.append(Readings(
            t=t,
            encoder_counts=np.floor(angle * CPR / (2 * np.pi)),
            gyro_rate=w + rng.normal(0.0, 0.01, n),
            imu_valid=np.ones(n, bool),
            gyro_interval=np.full(n, DT if k else 0.0),
            fix=fix,
            fix_valid=fix_valid,
            fix_time=np.where(fix_valid, t - latency_ticks * DT, np.nan),
            fix_sigma=np.array([0.02, 0.02, 0.02]),
            ranges=_ranges(pose, k, rng),
            range_valid=np.full((n, len(MOUNTS)), k % 8 == 0),
            range_mounts=MOUNTS,
            range_max=np.full(len(MOUNTS), 4.0),
            truth=pose.copy(),
        ))
    return np.array(truth), out


def _ranges(pose: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    if k % 8:
        return np.full((pose.shape[0], len(MOUNTS)), np.nan)
    d, _ = expected_ranges(WALLS, pose, MOUNTS)
    d = d + 0.01 * rng.standard_normal(d.shape)
    return np.where(d <= 4.0, d, np.inf)


def row(readings: Readings, i: int) -> Readings:
    """Readings of robot ``i`` alone (batch of 1)."""
    kw = {}
    for name in Readings.__slots__:
        value = getattr(readings, name)
        if name not in ("t", "fix_sigma", "range_mounts", "range_max") and value is not None:
            value = value[i : i + 1]
        kw[name] = value
    return Readings(**kw)
