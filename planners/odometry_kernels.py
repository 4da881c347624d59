"""Compiled steps of :class:`planners.odometry.Odometry`: one call per tick for the batch.

A tick runs in three passes over the robots, each robot's numbers computed from its own row
only (so a robot's result does not depend on the batch):

1. counts -> body twist ``[dx, dy, dtheta]`` (and the IMU heading logic), held in ``step``;
2. every robot that turned at most ``SERIES_MAX``: the exact arc by the series of
   :func:`planners.se2.arc_series` and ``pose <- pose * exp(xi)``. The heading's cosine and
   sine are carried in ``cs`` and turned by the step's ``cos t = 1 - t B``,
   ``sin t = t A`` (angle sum), then pulled back to unit length, so this pass calls no
   trigonometric function and has no branch: LLVM vectorises it over the robots;
3. the rare robot that turned further (or whose twist is not finite): the same step by
   :func:`planners.se2.exp_one` (libm), and ``cs`` taken afresh from the new heading.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.se2 import SERIES_MAX, arc_series, exp_one, turn_small, wrap_once, wrap_one

#: bits of the ``flags`` argument of :func:`odometry_kernel`
USE_IMU, OWN_HEADING, POSITIONS = 1, 2, 4


@njit(cache=True, inline="always")
def count_increment(c, p, gain, i, w):
    """Body displacement ``gain @ (counts - prev)`` of robot ``i`` over one tick (the counts
    become the previous ones): dx, dy [m], dtheta [rad], body frame.

    ``c``, ``p`` are flat ``(N * w,)`` views of the counts and the previous counts (N, w):
    constant strides, so LLVM sees that rows do not overlap.
    """
    dx = 0.0
    dy = 0.0
    dth = 0.0
    for j in range(w):
        d = c[i * w + j] - p[i * w + j]
        p[i * w + j] = c[i * w + j]
        dx += gain[0, j] * d
        dy += gain[1, j] * d
        dth += gain[2, j] * d
    return dx, dy, dth


@njit(cache=True, inline="always")
def _count_rows(c, p, gain, q, n, w):
    # a constant w lets LLVM unroll each row
    for i in range(n):
        q[3 * i], q[3 * i + 1], q[3 * i + 2] = count_increment(c, p, gain, i, w)


@njit(cache=True)
def _twists(counts, prev, gain, flags, gyro, valid, interval, imu, dt, pose, step):
    """Pass 1: each robot's body twist into ``step``."""
    n, w = counts.shape
    c = counts.reshape(n * w)
    p = prev.reshape(n * w)
    q = step.reshape(3 * n)
    if w == 2:  # the usual counts of wheels and pods, unrolled
        _count_rows(c, p, gain, q, n, 2)
    elif w == 3:
        _count_rows(c, p, gain, q, n, 3)
    elif w == 4:
        _count_rows(c, p, gain, q, n, 4)
    else:
        _count_rows(c, p, gain, q, n, w)
    if flags & USE_IMU:
        own_heading = (flags & OWN_HEADING) != 0
        for i in range(n):
            # imu rows: integrated gyro heading, turn since its last sample, last gyro rate
            if valid[i]:
                imu[0, i] += gyro[i] * interval[i]
                imu[1, i] = 0.0
                imu[2, i] = gyro[i]
            elif own_heading:
                imu[1, i] += q[3 * i + 2]
            else:
                imu[1, i] += imu[2, i] * dt
            dth = wrap_one(imu[0, i] + imu[1, i] - pose[i, 2])
            q[3 * i] += gain[0, w] * dth  # column w of gain: the effect of a given dtheta
            q[3 * i + 1] += gain[1, w] * dth
            q[3 * i + 2] = dth


@njit(cache=True)
def _near_steps(pose, cos_h, sin_h, step, positions):
    """Pass 2: rows with ``|dtheta| <= SERIES_MAX`` (the others untouched); x, y and their
    cos, sin only with ``positions``. Returns how many rows are left for pass 3."""
    n = pose.shape[0]
    p = pose.reshape(3 * n)
    q = step.reshape(3 * n)
    far = 0
    for i in range(n):
        x0, y0, h0, c, s = p[3 * i], p[3 * i + 1], p[3 * i + 2], cos_h[i], sin_h[i]
        dx, dy, t = q[3 * i], q[3 * i + 1], q[3 * i + 2]
        near = abs(t) <= SERIES_MAX
        move = near & positions  # selects, not branches: the loop stays vectorised
        # arc (Sola 2018, eq. 156), and the carried cos, sin turned by t
        a, b = arc_series(t)
        ex = a * dx - b * dy
        ey = b * dx + a * dy
        c2, s2 = turn_small(c, s, t, a, b)
        # pose * exp(xi), as planners.se2.compose_one with the carried cos, sin
        x = x0 + c * ex - s * ey
        y = y0 + s * ex + c * ey
        h = wrap_once(h0 + t)
        p[3 * i] = x if move else x0
        p[3 * i + 1] = y if move else y0
        p[3 * i + 2] = h if near else h0
        cos_h[i] = c2 if move else c
        sin_h[i] = s2 if move else s
        q[3 * i] = ex if near else dx
        q[3 * i + 1] = ey if near else dy
        far += not near
    return far


@njit(cache=True)
def _far_steps(pose, cs, step, positions):
    """Pass 3: rows with ``|dtheta| > SERIES_MAX`` (or not finite), by libm."""
    for i in range(pose.shape[0]):
        if abs(step[i, 2]) <= SERIES_MAX:
            continue
        ex, ey, eh = exp_one(step[i, 0], step[i, 1], step[i, 2])
        step[i, 0], step[i, 1], step[i, 2] = ex, ey, eh
        h = wrap_one(pose[i, 2] + eh)
        pose[i, 2] = h
        if positions:
            c, s = cs[0, i], cs[1, i]
            pose[i, 0] = pose[i, 0] + c * ex - s * ey
            pose[i, 1] = pose[i, 1] + s * ex + c * ey
            cs[0, i] = np.cos(h)
            cs[1, i] = np.sin(h)


@njit(cache=True)
def odometry_kernel(pose, cs, counts, prev, gain, flags, gyro, valid, interval, imu, dt, step):
    """One tick of dead reckoning for N robots, in place.

    Parameters
    ----------
    pose : ndarray, shape (N, 3) — x [m], y [m], heading [rad] in (-pi, pi], field frame
    cs : ndarray, shape (2, N) — cos, sin of each heading (kept in step with ``pose``)
    counts, prev : ndarray, shape (N, W) — this tick's and the previous counts (``prev`` is
        overwritten by ``counts``)
    gain : ndarray, shape (3, W + 1) — counts -> twist [m, m, rad]; column W: the change of
        dx, dy per given dtheta (IMU heading)
    flags : int — ``USE_IMU | OWN_HEADING | POSITIONS`` bits
    gyro, interval : ndarray, shape (N,) — gyro rate [rad/s] and the time it covers [s]
    valid : ndarray of bool, shape (N,) — a gyro sample arrived
    imu : ndarray, shape (3, N) — integrated gyro heading, turn since the last sample
        [rad], last gyro rate [rad/s]
    dt : float — time since the previous tick [s]
    step : ndarray, shape (N, 3) — written: each robot's move, body frame of the previous
        estimate [m, m, rad]
    """
    _twists(counts, prev, gain, flags, gyro, valid, interval, imu, dt, pose, step)
    positions = (flags & POSITIONS) != 0
    far = _near_steps(pose, cs[0], cs[1], step, positions)
    if far:
        _far_steps(pose, cs, step, positions)
