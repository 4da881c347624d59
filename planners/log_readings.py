"""A robot log as the sensor readings an estimator consumes, one :class:`Readings` per row.

This is what runs on the robot side of a replay: the same estimators that ran in the
simulator (or on the robot) get the logged stream, with N = 1. Encoder positions are passed
as shaft angle in radians (so the encoder's counts per revolution is 2 pi), integrated from
``velocity_<w>`` when the log has no positions (:meth:`RobotLog.wheel_angle`); pods as metres.
A gyro sample is valid on the rows where ``yaw_rate`` is filled in, covering the time since
the previous valid sample; a fix on the rows where ``fix_x fix_y fix_heading`` are filled in,
describing the pose ``fix_latency`` seconds (log metadata, default 0) before the row's time.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

from planners.readings import Readings
from planners.robot_log import RobotLog

#: encoder counts per revolution of the readings made from a log (positions are in rad)
LOG_COUNTS_PER_REV = 2.0 * np.pi


def log_readings(log: RobotLog) -> Iterator[Readings]:
    """Readings of one robot, row by row.

    Parameters
    ----------
    log : RobotLog

    Yields
    ------
    Readings — N = 1; ``truth`` holds the logged true pose when the log has one
    """
    position = log.wheel_angle()
    if position is not None:
        # a missing sample holds the last position (encoders are read every tick on a robot)
        position = _hold(position)
    pods = log.pods() if any(c.startswith("pod_") for c in log.columns) else None
    if pods is not None:
        pods = _hold(pods)
    rate = log.columns.get("yaw_rate")
    fix = log.pose("fix")
    truth = log.pose("true")
    latency = float(log.meta.get("fix_latency", 0.0))
    last_gyro = float(log.t[0])
    for i, t in enumerate(log.t):
        r = Readings(t=float(t))
        if position is not None:
            r.encoder_counts = position[i][None, :]
        if pods is not None:
            r.pod_counts = pods[i][None, :]
        if rate is not None:
            valid = bool(np.isfinite(rate[i])) and i > 0
            r.imu_valid = np.array([valid])
            r.gyro_rate = np.array([rate[i] if valid else np.nan])
            r.gyro_interval = np.array([t - last_gyro if valid else 0.0])
            if valid:
                last_gyro = float(t)
        if fix is not None:
            valid = bool(np.all(np.isfinite(fix[i])))
            r.fix_valid = np.array([valid])
            r.fix = fix[i][None, :].copy() if valid else np.full((1, 3), np.nan)
            r.fix_time = np.array([t - latency if valid else np.nan])
        if truth is not None and np.all(np.isfinite(truth[i])):
            r.truth = truth[i][None, :].copy()
        yield r


def _hold(values: np.ndarray) -> np.ndarray:
    """Fill NaN rows with the last finite value (the first finite value before any)."""
    out = np.array(values, dtype=np.float64)
    for j in range(out.shape[1]):
        col = out[:, j]
        ok = np.isfinite(col)
        if not ok.any():
            col[:] = 0.0
            continue
        idx = np.where(ok, np.arange(len(col)), -1)
        np.maximum.accumulate(idx, out=idx)
        first = int(np.flatnonzero(ok)[0])
        idx[idx < 0] = first
        out[:, j] = col[idx]
    return out
