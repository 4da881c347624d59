"""What the robot's sensors report at one control tick, for N robots.

:class:`Readings` is robot-side: estimators and odometry in :mod:`planners` consume it; the
simulator (:mod:`sim.sensors`) produces it, and on a real robot a log reader would. A field
is ``None`` when the robot has no such sensor. Every array has the batch axis first.

Samples that did not arrive this tick are marked by a ``*_valid`` flag and hold NaN, so a
stale value is never used by mistake. Counts are cumulative since the start; a consumer
differences them itself. There is no measured wheel speed: the wheel controller
differences ``encoder_counts`` over its own window, as a motor controller does.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(eq=False, slots=True)
class Readings:
    """Sensor readings of N robots at time ``t``.

    Attributes
    ----------
    t : float
        Time of the tick [s].
    encoder_counts : ndarray, shape (N, W), or None
        Cumulative drive-wheel counts (whole numbers as floats unless the encoders are
        configured not to quantise). Wheel order of the chassis.
    pod_counts : ndarray, shape (N, P), or None
        Cumulative tracking-wheel counts, pods in scenario order.
    gyro_rate : ndarray, shape (N,), or None
        Yaw rate [rad/s]: the mean over ``gyro_interval`` (NaN where ``imu_valid`` is false).
    imu_valid : ndarray of bool, shape (N,), or None
        A gyro sample arrived this tick.
    gyro_interval : ndarray, shape (N,), or None
        Time the sample covers [s]: since the previous sample (0 where not valid).
    fix : ndarray, shape (N, 3), or None
        Absolute pose x [m], y [m], heading [rad], field frame (NaN where not valid).
    fix_valid : ndarray of bool, shape (N,), or None
        A fix arrived this tick.
    fix_time : ndarray, shape (N,), or None
        Time the fix describes [s] (``t - latency``; NaN where not valid).
    fix_sigma : ndarray, shape (3,), or None
        Standard deviation of a fix: x [m], y [m], heading [rad].
    ranges : ndarray, shape (N, R), or None
        Distance along each range sensor's ray [m]; ``inf`` when nothing is within its
        maximum range; NaN where ``range_valid`` is false.
    range_valid : ndarray of bool, shape (N, R), or None
        A range sample arrived this tick.
    range_mounts : ndarray, shape (R, 3), or None
        Each range sensor's mounting pose x [m], y [m], direction [rad], body frame.
    range_max : ndarray, shape (R,), or None
        Each range sensor's maximum range [m].
    battery_voltage : ndarray, shape (N,), or None
        Battery terminal voltage [V]; filled by the runner, not by the sensors.
    truth : ndarray, shape (N, 3), or None
        The true pose, filled by the runner for the ``truth`` estimator only (a perfect
        sensor that no real robot has).
    """

    t: float
    encoder_counts: np.ndarray | None = None
    pod_counts: np.ndarray | None = None
    gyro_rate: np.ndarray | None = None
    imu_valid: np.ndarray | None = None
    gyro_interval: np.ndarray | None = None
    fix: np.ndarray | None = None
    fix_valid: np.ndarray | None = None
    fix_time: np.ndarray | None = None
    fix_sigma: np.ndarray | None = None
    ranges: np.ndarray | None = None
    range_valid: np.ndarray | None = None
    range_mounts: np.ndarray | None = None
    range_max: np.ndarray | None = None
    battery_voltage: np.ndarray | None = None
    truth: np.ndarray | None = None
