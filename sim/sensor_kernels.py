"""The compiled per-tick kernels of the sensor models (:mod:`sim.sensors`), batched over N robots.

Noise draws arrive as blocks (``z`` normals, ``u`` uniforms, starting at column ``z0``/``u0``)
from :mod:`sim.sensors_noise`.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.se2 import compose_one, log_one, wrap_one


@njit(cache=True)
def twist_kernel(prev, pose, out):
    # log(between(prev, pose)): the difference rotated by -heading (compose of a pure
    # rotation), then the constant twist of the arc joining them
    for i in range(pose.shape[0]):
        x, y, h = compose_one(
            0.0, 0.0, -prev[i, 2], pose[i, 0] - prev[i, 0], pose[i, 1] - prev[i, 1], pose[i, 2]
        )
        out[i, 0], out[i, 1], out[i, 2] = log_one(x, y, h)


@njit(cache=True)
def encoder_kernel(wheel_angle, counts_per_rad, noise, quantise, z, z0, out):
    for i in range(wheel_angle.shape[0]):
        for j in range(wheel_angle.shape[1]):
            c = wheel_angle[i, j] * counts_per_rad
            if noise > 0.0:
                c += noise * z[i, z0 + j]
            out[i, j] = np.floor(c) if quantise else c


@njit(cache=True)
def pod_kernel(twist, row, counts_per_m, scale, noise, skip, quantise, z, z0, u, u0, acc, out):
    # pod travel of one tick: s = a . xi,  a = [cos d, sin d, x sin d - y cos d]
    for i in range(twist.shape[0]):
        for j in range(row.shape[0]):
            s = row[j, 0] * twist[i, 0] + row[j, 1] * twist[i, 1] + row[j, 2] * twist[i, 2]
            lost = skip[j] > 0.0 and u[i, u0 + j] < skip[j]
            if not lost:
                acc[i, j] += s * (1.0 + scale[i, j]) * counts_per_m[j]
            c = acc[i, j]
            if noise[j] > 0.0:
                c += noise[j] * z[i, z0 + j]
            out[i, j] = np.floor(c) if quantise[j] else c


@njit(cache=True)
def imu_kernel(prev, pose, due, interval, density, walk, bias, scale, z, z0, acc, out):
    # the turn of the tick is the heading change wrap(h - h_prev), as in log(between(prev,
    # pose)); prev moves on to pose
    for i in range(pose.shape[0]):
        acc[i] += wrap_one(pose[i, 2] - prev[i, 2])
        prev[i, 0], prev[i, 1], prev[i, 2] = pose[i, 0], pose[i, 1], pose[i, 2]
        if not due:
            out[i] = np.nan
            continue
        # bias random walk: b += K sqrt(T) w;  white rate noise: N / sqrt(T) w
        # (IEEE Std 952-1997: angle random walk N, rate random walk K)
        if walk > 0.0:
            bias[i] += walk * np.sqrt(interval) * z[i, z0 + 1]
        r = (1.0 + scale[i]) * acc[i] / interval + bias[i]
        if density > 0.0:
            r += density / np.sqrt(interval) * z[i, z0]
        out[i] = r
        acc[i] = 0.0


@njit(cache=True)
def mount_kernel(pose, mounts, origin, heading):
    # ray start and direction of every (robot, sensor): pose * mount, field frame
    r = mounts.shape[0]
    for i in range(pose.shape[0]):
        for j in range(r):
            x, y, h = compose_one(pose[i, 0], pose[i, 1], pose[i, 2], mounts[j, 0], mounts[j, 1], mounts[j, 2])
            origin[i * r + j, 0] = x
            origin[i * r + j, 1] = y
            heading[i * r + j] = h


@njit(cache=True)
def range_kernel(d, sigma, z, due, out):
    for i in range(d.shape[0]):
        for j in range(d.shape[1]):
            if not due[j]:
                continue
            v = d[i, j]
            if z.shape[1] and np.isfinite(v):
                v = max(v + sigma[j] * z[i, j], 0.0)
            out[i, j] = v
