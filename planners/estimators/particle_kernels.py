"""Compiled steps of the ``particle`` estimator: one call per control tick for the whole batch.

Particles ``p`` (N, M, 3) and weights ``w`` (N, M) hold one robot per row; every draw of
robot i comes from its own key (:mod:`planners.estimators.draws`), so a robot's particles do
not depend on the batch. The model is in the docstring of :mod:`planners.estimators.particle`.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from planners.estimators.draws import MOTION, RESAMPLE, RESET, START, normals4, uniforms4
from planners.estimators.ekf_kernels import increment_variances, wrap_near
from planners.raycast import ray_hit_one
from planners.se2 import wrap_one

_SQRT2 = math.sqrt(2.0)
_LOG_NORM = -0.5 * math.log(2.0 * math.pi)


@njit(cache=True, inline="always")
def inside_one(segs, x, y):
    """Whether ``(x, y)`` is on the free floor of the walls ``segs`` (S, 4): a ray towards +x
    crosses the boundary an odd number of times from inside and every obstacle ring an even
    number of times from outside it (O'Rourke, *Computational Geometry in C*, 1998, §7.4)."""
    crossings = 0
    for j in range(segs.shape[0]):
        y0 = segs[j, 1]
        y1 = segs[j, 3]
        if (y0 > y) != (y1 > y):
            cx = segs[j, 0] + (y - y0) * (segs[j, 2] - segs[j, 0]) / (y1 - y0)
            if cx > x:
                crossings += 1
    return crossings % 2 == 1


@njit(cache=True)
def inside_kernel(segs, xy, out):
    """:func:`inside_one` for each point ``xy`` (K, 2); ``out`` (K,) bool."""
    for k in range(xy.shape[0]):
        out[k] = inside_one(segs, xy[k, 0], xy[k, 1])


@njit(cache=True)
def uniform_start(segs, keys, p, w):
    """Particles of every robot uniform over the free floor (rejection from the bounding box)
    with uniform heading, equal weights."""
    lo_x = min(segs[:, 0].min(), segs[:, 2].min())
    hi_x = max(segs[:, 0].max(), segs[:, 2].max())
    lo_y = min(segs[:, 1].min(), segs[:, 3].min())
    hi_y = max(segs[:, 1].max(), segs[:, 3].max())
    m = p.shape[1]
    for i in range(p.shape[0]):
        for j in range(m):
            attempt = 0
            while True:
                u0, u1, u2, _ = uniforms4(keys, i, attempt, j, START)
                x = lo_x + (hi_x - lo_x) * u0
                y = lo_y + (hi_y - lo_y) * u1
                attempt += 1
                if inside_one(segs, x, y):
                    break
            p[i, j, 0] = x
            p[i, j, 1] = y
            p[i, j, 2] = wrap_one(np.pi * (2.0 * u2 - 1.0))
            w[i, j] = 1.0 / m


@njit(cache=True, inline="always")
def beam_log_likelihood(z, t, zmax, sigma, outlier):
    """Log of the beam model: with probability ``1 - outlier`` the true range ``t`` plus
    ``N(0, sigma^2)`` (read as ``inf`` when beyond ``zmax``), else an outlier uniform over
    ``[0, zmax]`` (a finite reading) or a missed beam (``inf``).

    ``z`` finite: ``(1 - e) phi((z - t) / sigma) / sigma + e / zmax``;
    ``z = inf``: ``(1 - e) Phi((t - zmax) / sigma) + e`` (Thrun, Burgard, Fox, *Probabilistic
    Robotics*, 2005, §6.3, the beam model's hit, random and max-range parts).
    """
    if np.isfinite(z):
        hit = 0.0
        if np.isfinite(t):
            r = (z - t) / sigma
            hit = math.exp(_LOG_NORM - 0.5 * r * r) / sigma
        return math.log((1.0 - outlier) * hit + outlier / zmax)
    beyond = 1.0 if not np.isfinite(t) else 0.5 * math.erfc(-(t - zmax) / (sigma * _SQRT2))
    return math.log((1.0 - outlier) * beyond + outlier)


@njit(cache=True)
def particle_tick(
    tick, step, keys, noise, p, w, ll, spare,
    fix, fix_valid, fix_sigma, reset_gate,
    ranges, range_valid, segs, mounts, range_max, range_sigma, outlier,
    resample_below, estimate,
):
    """One tick for every robot: sampled motion, fix and beam weights, resampling, estimate.

    Parameters
    ----------
    tick : int — tick counter (the draws' counter)
    step : ndarray (N, 3) — odometry increment, body frame [m, m, rad]
    keys : ndarray (N, 2) uint64 — each robot's generator key
    noise : ndarray (7,) — increment variances, as the ``ekf``
        (:func:`planners.estimators.ekf_kernels.increment_variances`)
    p, w : ndarray (N, M, 3), (N, M) — particles and weights, updated in place
    ll, spare : ndarray (M,), (M, 3) — scratch space
    fix, fix_valid : ndarray (N, 3), (N,) — fixes (shape (0, ...) when none)
    fix_sigma : ndarray (3,) — fix standard deviations [m, m, rad]
    reset_gate : float — squared distance of a fix from the best particle that redraws the
        cloud from the fix (0: never)
    ranges, range_valid : ndarray (N, R) — beams (shape (N, 0): none used)
    segs, mounts, range_max, range_sigma : walls (S, 4), beams (R, 3), (R,), (R,)
    outlier : float — beam outlier probability
    resample_below : float — resample when the effective sample size is below this
    estimate : ndarray (N, 3) — written: weighted mean (circular mean of heading)
    """
    m = p.shape[1]
    n_beams = ranges.shape[1]
    has_fix = fix_valid.shape[0] > 0
    for i in range(p.shape[0]):
        ux, uy, ut = step[i, 0], step[i, 1], step[i, 2]
        q0, q1, q2 = increment_variances(noise, ux, uy, ut)
        s0, s1, s2 = np.sqrt(q0), np.sqrt(q1), np.sqrt(q2)
        for j in range(m):
            z0, z1, z2, _ = normals4(keys, i, tick, j, MOTION)
            vx = ux + s0 * z0
            vy = uy + s1 * z1
            c = np.cos(p[i, j, 2])
            s = np.sin(p[i, j, 2])
            p[i, j, 0] += c * vx - s * vy
            p[i, j, 1] += s * vx + c * vy
            p[i, j, 2] = wrap_near(p[i, j, 2] + ut + s2 * z2)
        measured = False
        for j in range(m):
            ll[j] = 0.0
        best = np.inf
        fixed = has_fix and fix_valid[i] and np.isfinite(fix[i, 0]) and np.isfinite(fix[i, 1]) \
            and np.isfinite(fix[i, 2])
        if fixed:
            measured = True
            f0 = max(fix_sigma[0], 1e-9)
            f1 = max(fix_sigma[1], 1e-9)
            f2 = max(fix_sigma[2], 1e-9)
            for j in range(m):
                e0 = (fix[i, 0] - p[i, j, 0]) / f0
                e1 = (fix[i, 1] - p[i, j, 1]) / f1
                e2 = wrap_near(fix[i, 2] - p[i, j, 2]) / f2
                d2 = e0 * e0 + e1 * e1 + e2 * e2
                best = min(best, d2)
                ll[j] -= 0.5 * d2
        for k in range(n_beams):
            if not range_valid[i, k] or np.isnan(ranges[i, k]):
                continue
            measured = True
            for j in range(m):
                a = p[i, j, 2] + mounts[k, 2]
                c = np.cos(p[i, j, 2])
                s = np.sin(p[i, j, 2])
                ox = p[i, j, 0] + c * mounts[k, 0] - s * mounts[k, 1]
                oy = p[i, j, 1] + s * mounts[k, 0] + c * mounts[k, 1]
                t, _ = ray_hit_one(segs, ox, oy, np.cos(a), np.sin(a))
                ll[j] += beam_log_likelihood(ranges[i, k], t, range_max[k], range_sigma[k], outlier)
        if measured:
            top = -np.inf
            for j in range(m):
                top = max(top, ll[j])
            total = 0.0
            for j in range(m):
                w[i, j] *= math.exp(ll[j] - top)
                total += w[i, j]
            sq = 0.0
            for j in range(m):
                w[i, j] /= total
                sq += w[i, j] * w[i, j]
            if fixed and reset_gate > 0.0 and best > reset_gate:
                # sensor resetting: no particle explains the fix; redraw from N(z, R)
                for j in range(m):
                    z0, z1, z2, _ = normals4(keys, i, tick, j, RESET)
                    p[i, j, 0] = fix[i, 0] + fix_sigma[0] * z0
                    p[i, j, 1] = fix[i, 1] + fix_sigma[1] * z1
                    p[i, j, 2] = wrap_one(fix[i, 2] + fix_sigma[2] * z2)
                    w[i, j] = 1.0 / m
            elif 1.0 / sq < resample_below:
                _systematic(p, w, i, uniforms4(keys, i, tick, 0, RESAMPLE)[0], spare)
        _mean(p, w, i, estimate)


@njit(cache=True, inline="always")
def _systematic(p, w, i, u, spare):
    # systematic ("low variance") resampling: pointers (u + k) / M walk the cumulative weights
    # (Thrun, Burgard, Fox, Probabilistic Robotics, 2005, Table 4.4)
    m = p.shape[1]
    acc = w[i, 0]
    src = 0
    for k in range(m):
        pointer = (u + k) / m
        while pointer > acc and src < m - 1:
            src += 1
            acc += w[i, src]
        spare[k, 0] = p[i, src, 0]
        spare[k, 1] = p[i, src, 1]
        spare[k, 2] = p[i, src, 2]
    for k in range(m):
        p[i, k, 0] = spare[k, 0]
        p[i, k, 1] = spare[k, 1]
        p[i, k, 2] = spare[k, 2]
        w[i, k] = 1.0 / m


@njit(cache=True, inline="always")
def _mean(p, w, i, estimate):
    sx = 0.0
    sy = 0.0
    ss = 0.0
    sc = 0.0
    for j in range(p.shape[1]):
        sx += w[i, j] * p[i, j, 0]
        sy += w[i, j] * p[i, j, 1]
        ss += w[i, j] * np.sin(p[i, j, 2])
        sc += w[i, j] * np.cos(p[i, j, 2])
    estimate[i, 0] = sx
    estimate[i, 1] = sy
    estimate[i, 2] = np.arctan2(ss, sc)


@njit(cache=True)
def particle_covariance(p, w, estimate, out):
    """Weighted covariance (N, 3, 3) of the particles about ``estimate``, heading deviations
    wrapped; ``1e-10`` on the diagonal keeps it invertible when all particles coincide."""
    for i in range(p.shape[0]):
        for a in range(3):
            for b in range(3):
                out[i, a, b] = 1e-10 if a == b else 0.0
        for j in range(p.shape[1]):
            d0 = p[i, j, 0] - estimate[i, 0]
            d1 = p[i, j, 1] - estimate[i, 1]
            d2 = wrap_near(p[i, j, 2] - estimate[i, 2])
            wj = w[i, j]
            out[i, 0, 0] += wj * d0 * d0
            out[i, 0, 1] += wj * d0 * d1
            out[i, 0, 2] += wj * d0 * d2
            out[i, 1, 1] += wj * d1 * d1
            out[i, 1, 2] += wj * d1 * d2
            out[i, 2, 2] += wj * d2 * d2
        out[i, 1, 0] = out[i, 0, 1]
        out[i, 2, 0] = out[i, 0, 2]
        out[i, 2, 1] = out[i, 1, 2]
