"""The compiled per-tick kernels of the sensor models (:mod:`sim.sensors`), batched over N robots.

Noise draws arrive from :mod:`sim.sensors_noise` as ``z`` normals and ``u`` uniforms of
shape (draws, N): one row per draw, one column per robot; an empty (0, N) when the sensor
draws nothing.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.raycast import ray_hit_one
from planners.se2 import log_one, turn_trig, wrap_one


@njit(cache=True)
def motion_kernel(prev, trig, pose, twist):
    # the constant twist of the arc from prev to pose: log(between(prev, pose)), with the
    # difference rotated by -heading through prev's carried cos/sin; prev and its cos/sin
    # move on to pose
    for i in range(pose.shape[0]):
        c, s = trig[i, 0], trig[i, 1]
        dx = pose[i, 0] - prev[i, 0]
        dy = pose[i, 1] - prev[i, 1]
        turn = wrap_one(pose[i, 2] - prev[i, 2])
        twist[i, 0], twist[i, 1], twist[i, 2] = log_one(c * dx + s * dy, c * dy - s * dx, turn)
        trig[i, 0], trig[i, 1] = turn_trig(c, s, turn, pose[i, 2])
        prev[i, 0], prev[i, 1], prev[i, 2] = pose[i, 0], pose[i, 1], pose[i, 2]


@njit(cache=True)
def encoder_kernel(wheel_angle, counts_per_rad, noise, quantise, z, out):
    for i in range(wheel_angle.shape[0]):
        for j in range(wheel_angle.shape[1]):
            c = wheel_angle[i, j] * counts_per_rad
            if noise > 0.0:
                c += noise * z[j, i]
            out[i, j] = np.floor(c) if quantise else c


@njit(cache=True)
def pod_kernel(twist, row, counts_per_m, scale, noise, skip, quantise, z, u, acc, out):
    # pod travel of one tick: s = a . xi,  a = [cos d, sin d, x sin d - y cos d]
    for i in range(twist.shape[0]):
        for j in range(row.shape[0]):
            s = row[j, 0] * twist[i, 0] + row[j, 1] * twist[i, 1] + row[j, 2] * twist[i, 2]
            lost = skip[j] > 0.0 and u[j, i] < skip[j]
            if not lost:
                acc[i, j] += s * (1.0 + scale[i, j]) * counts_per_m[j]
            c = acc[i, j]
            if noise[j] > 0.0:
                c += noise[j] * z[j, i]
            out[i, j] = np.floor(c) if quantise[j] else c


@njit(cache=True)
def imu_kernel(twist, state, z, out, due, interval, density, walk):
    # state rows: bias (walks), scale error, turn since the last sample; the turn of the
    # tick is the twist's dtheta, wrap(h - h_prev)
    for i in range(twist.shape[0]):
        state[2, i] += twist[i, 2]
        if not due:
            out[i] = np.nan
            continue
        # bias random walk: b += K sqrt(T) w;  white rate noise: N / sqrt(T) w
        # (IEEE Std 952-1997: angle random walk N, rate random walk K)
        if walk > 0.0:
            state[0, i] += walk * np.sqrt(interval) * z[1, i]
        r = (1.0 + state[1, i]) * state[2, i] / interval + state[0, i]
        if density > 0.0:
            r += density / np.sqrt(interval) * z[0, i]
        out[i] = r
        state[2, i] = 0.0


@njit(cache=True)
def range_kernel(segs, pose, trig, rays, max_range, due, sigma, z, out):
    # each (robot, sensor due this tick): the ray from pose * mount along the mount's
    # direction (rays: x, y, direction, its cos, sin; body frame), inf beyond the maximum
    # range, plus sigma * z where z has rows (noise-free when it has none); NaN when not due
    for i in range(pose.shape[0]):
        c, s = trig[i, 0], trig[i, 1]
        for j in range(rays.shape[0]):
            if not due[j]:
                out[i, j] = np.nan
                continue
            ox = pose[i, 0] + c * rays[j, 0] - s * rays[j, 1]
            oy = pose[i, 1] + s * rays[j, 0] + c * rays[j, 1]
            d, _ = ray_hit_one(segs, ox, oy, c * rays[j, 3] - s * rays[j, 4], s * rays[j, 3] + c * rays[j, 4])
            if d > max_range[j]:
                d = np.inf
            elif z.shape[0]:
                d = max(d + sigma[j] * z[j, i], 0.0)
            out[i, j] = d


@njit(cache=True, inline="always")
def landmark_seen(segs, landmarks, k, x, y, ax, ay, max_range, cos_half_fov):
    """Whether landmark ``k`` is seen from ``(x, y)`` by a camera along the unit ``(ax, ay)``.

    Within range, inside the field of view (the angle between the camera axis and the
    landmark at most half the field of view: ``a . rel >= |rel| cos(fov / 2)``) and not
    hidden: no wall nearer on the line of sight (a landmark on a wall is hit at its own
    distance).
    """
    rx = landmarks[k, 0] - x
    ry = landmarks[k, 1] - y
    dist = np.hypot(rx, ry)
    if dist > max_range or ax * rx + ay * ry < dist * cos_half_fov:
        return False
    if dist == 0.0:
        return True
    hit, _ = ray_hit_one(segs, x, y, rx / dist, ry / dist)
    return hit >= dist * (1.0 - 1e-9) - 1e-9


@njit(cache=True)
def landmark_kernel(segs, landmarks, pose, max_range, cos_half_fov, dcos, dsin, out):
    # out[i, k]: landmark k seen from robot i (camera at direction (dcos, dsin), body frame)
    for i in range(pose.shape[0]):
        c, s = np.cos(pose[i, 2]), np.sin(pose[i, 2])
        for k in range(landmarks.shape[0]):
            out[i, k] = landmark_seen(segs, landmarks, k, pose[i, 0], pose[i, 1],
                                      c * dcos - s * dsin, s * dcos + c * dsin, max_range, cos_half_fov)


@njit(cache=True)
def fix_kernel(segs, landmarks, seen, max_range, cos_half_fov, dcos, dsin, dropout, sigma,
               z, u, stamp, fix, fix_time, valid):
    # a fix of the pose ``seen`` (of ``latency`` ago) where any landmark is seen and the
    # fix is not dropped (u < dropout), with noise sigma * z; NaN elsewhere
    for i in range(seen.shape[0]):
        x, y, h = seen[i, 0], seen[i, 1], seen[i, 2]
        c, s = np.cos(h), np.sin(h)
        ok = u.shape[0] == 0 or u[0, i] >= dropout
        if ok:
            ok = False
            for k in range(landmarks.shape[0]):
                if landmark_seen(segs, landmarks, k, x, y, c * dcos - s * dsin,
                                 s * dcos + c * dsin, max_range, cos_half_fov):
                    ok = True
                    break
        valid[i] = ok
        if not ok:
            fix[i, 0] = fix[i, 1] = fix[i, 2] = fix_time[i] = np.nan
            continue
        if z.shape[0]:
            x += sigma[0] * z[0, i]
            y += sigma[1] * z[1, i]
            h = wrap_one(h + sigma[2] * z[2, i])
        fix[i, 0], fix[i, 1], fix[i, 2] = x, y, h
        fix_time[i] = stamp
