"""Compiled steps of the ``particle`` estimator: one call per control tick for the whole batch.

Particles ``p`` (N, M, 3) and weights ``w`` (N, M) hold one robot per row; every draw of
robot i comes from its own key (:mod:`planners.estimators.draws`), so a robot's particles do
not depend on the batch. The model is in the docstring of :mod:`planners.estimators.particle`.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from planners.estimators.draws import INJECT, MOTION, RESAMPLE, RESET, START, normals4, uniforms4
from planners.estimators.ekf_kernels import increment_variances, wrap_near
from planners.raycast import ray_hit_one
from planners.se2 import compose_one, wrap_one

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
    tick, step, keys, noise, p, w, delta, spread, moments, ll, spare,
    fix, fix_valid, fix_sigma, reset_gate, inject,
    ranges, range_valid, segs, mounts, range_max, range_sigma, outlier,
    resample_below, estimate,
):
    """One tick for every robot: motion, fix and beam weights, resampling, estimate.

    Every particle of a robot moves by the same odometry increments, so between measurements
    the particles stay where they were and the increments are composed into ``delta``: a
    particle's pose now is ``p * delta``, exactly. The weighted mean of those poses needs only
    the moments ``X = sum w x``, ``Y = sum w y``, ``C = sum w cos h``, ``S = sum w sin h`` of
    the stored particles: ``x = X + C dx - S dy``, ``y = Y + S dx + C dy`` and the circular
    mean heading ``atan2(S, C) + dh``. At a tick with a measurement the particles are moved
    to ``p * delta`` and the motion noise accumulated since the last one (the sum of each
    increment's variances, ``spread``) is drawn once, in each particle's body frame.

    Parameters
    ----------
    tick : int — tick counter (the draws' counter)
    step : ndarray (N, 3) — odometry increment, body frame [m, m, rad]
    keys : ndarray (N, 2) uint64 — each robot's generator key
    noise : ndarray (7,) — increment variances, as the ``ekf``
        (:func:`planners.estimators.ekf_kernels.increment_variances`)
    p, w : ndarray (N, M, 3), (N, M) — stored particles and weights, updated in place
    delta, spread : ndarray (N, 3) — composed increments and summed variances since the last
        measurement, updated in place
    moments : ndarray (N, 4) — X, Y, C, S of the stored particles, updated in place
    ll, spare : ndarray (M,), (M, 3) — scratch space
    fix, fix_valid : ndarray (N, 3), (N,) — fixes (shape (0, ...) when none)
    fix_sigma : ndarray (3,) — fix standard deviations [m, m, rad]
    reset_gate : float — squared distance of a fix from the best particle that redraws the
        cloud from the fix (0: never)
    inject : int — particles redrawn from each fix's distribution (the last ones)
    ranges, range_valid : ndarray (N, R) — beams (shape (N, 0): none used)
    segs, mounts, range_max, range_sigma : walls (S, 4), beams (R, 3), (R,), (R,)
    outlier : float — beam outlier probability
    resample_below : float — resample when the effective sample size is below this
    estimate : ndarray (N, 3) — written: weighted mean (circular mean of heading)
    """
    n_beams = ranges.shape[1]
    has_fix = fix_valid.shape[0] > 0
    for i in range(p.shape[0]):
        ux, uy, ut = step[i, 0], step[i, 1], step[i, 2]
        q0, q1, q2 = increment_variances(noise, ux, uy, ut)
        delta[i, 0], delta[i, 1], delta[i, 2] = compose_one(delta[i, 0], delta[i, 1], delta[i, 2], ux, uy, ut)
        spread[i, 0] += q0
        spread[i, 1] += q1
        spread[i, 2] += q2
        fixed = has_fix and fix_valid[i] and np.isfinite(fix[i, 0]) and np.isfinite(fix[i, 1]) \
            and np.isfinite(fix[i, 2])
        measured = fixed
        for k in range(n_beams):
            measured = measured or (range_valid[i, k] and not np.isnan(ranges[i, k]))
        if measured:
            _move(p, i, delta, spread, keys, tick)
            reset = _weigh(p, w, i, ll, fixed, fix, fix_sigma, reset_gate, ranges, range_valid,
                           segs, mounts, range_max, range_sigma, outlier, resample_below, keys,
                           tick, spare)
            if fixed and inject > 0 and not reset:
                _inject(p, w, i, fix, fix_sigma, inject, keys, tick)
            _moments(p, w, i, moments)
        _mean(moments, delta, i, estimate)


@njit(cache=True, inline="always")
def _move(p, i, delta, spread, keys, tick):
    # particles to p * delta, then the accumulated noise, each in its own body frame
    dx, dy, dh = delta[i, 0], delta[i, 1], delta[i, 2]
    s0, s1, s2 = np.sqrt(spread[i, 0]), np.sqrt(spread[i, 1]), np.sqrt(spread[i, 2])
    for j in range(p.shape[1]):
        z0, z1, z2, _ = normals4(keys, i, tick, j, MOTION)
        vx = dx + s0 * z0
        vy = dy + s1 * z1
        c = np.cos(p[i, j, 2])
        s = np.sin(p[i, j, 2])
        p[i, j, 0] += c * vx - s * vy
        p[i, j, 1] += s * vx + c * vy
        p[i, j, 2] = wrap_near(p[i, j, 2] + wrap_near(dh + s2 * z2))
    delta[i, 0] = 0.0
    delta[i, 1] = 0.0
    delta[i, 2] = 0.0
    spread[i, 0] = 0.0
    spread[i, 1] = 0.0
    spread[i, 2] = 0.0


@njit(cache=True, inline="always")
def _inject(p, w, i, fix, fix_sigma, count, keys, tick):
    # the last `count` particles redrawn from N(z, R) at the mean weight: a partial sensor
    # reset that keeps some particles near every fix, so a cloud that settled on a wrong
    # spot near the truth can move over (Lenser and Veloso 2000)
    m = p.shape[1]
    for j in range(m - count, m):
        z0, z1, z2, _ = normals4(keys, i, tick, j, INJECT)
        p[i, j, 0] = fix[i, 0] + fix_sigma[0] * z0
        p[i, j, 1] = fix[i, 1] + fix_sigma[1] * z1
        p[i, j, 2] = wrap_one(fix[i, 2] + fix_sigma[2] * z2)
        w[i, j] = 1.0 / m
    total = 0.0
    for j in range(m):
        total += w[i, j]
    for j in range(m):
        w[i, j] /= total


@njit(cache=True, inline="always")
def _weigh(p, w, i, ll, fixed, fix, fix_sigma, reset_gate, ranges, range_valid, segs, mounts,
           range_max, range_sigma, outlier, resample_below, keys, tick, spare):
    # weights times the fix and beam likelihoods; sensor resetting (returns True) or
    # systematic resampling
    m = p.shape[1]
    for j in range(m):
        ll[j] = 0.0
    best = np.inf
    if fixed:
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
    for k in range(ranges.shape[1]):
        if not range_valid[i, k] or np.isnan(ranges[i, k]):
            continue
        for j in range(m):
            a = p[i, j, 2] + mounts[k, 2]
            c = np.cos(p[i, j, 2])
            s = np.sin(p[i, j, 2])
            ox = p[i, j, 0] + c * mounts[k, 0] - s * mounts[k, 1]
            oy = p[i, j, 1] + s * mounts[k, 0] + c * mounts[k, 1]
            t, _ = ray_hit_one(segs, ox, oy, np.cos(a), np.sin(a))
            ll[j] += beam_log_likelihood(ranges[i, k], t, range_max[k], range_sigma[k], outlier)
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
        return True
    if 1.0 / sq < resample_below:
        _systematic(p, w, i, uniforms4(keys, i, tick, 0, RESAMPLE)[0], spare)
    return False


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
def _moments(p, w, i, moments):
    sx = 0.0
    sy = 0.0
    sc = 0.0
    ss = 0.0
    for j in range(p.shape[1]):
        sx += w[i, j] * p[i, j, 0]
        sy += w[i, j] * p[i, j, 1]
        sc += w[i, j] * np.cos(p[i, j, 2])
        ss += w[i, j] * np.sin(p[i, j, 2])
    moments[i, 0] = sx
    moments[i, 1] = sy
    moments[i, 2] = sc
    moments[i, 3] = ss


@njit(cache=True, inline="always")
def _mean(moments, delta, i, estimate):
    # weighted mean of the particles p * delta from the moments of the stored ones
    x, y, c, s = moments[i, 0], moments[i, 1], moments[i, 2], moments[i, 3]
    estimate[i, 0] = x + c * delta[i, 0] - s * delta[i, 1]
    estimate[i, 1] = y + s * delta[i, 0] + c * delta[i, 1]
    estimate[i, 2] = wrap_near(np.arctan2(s, c) + delta[i, 2])


@njit(cache=True)
def moments_kernel(p, w, moments):
    """The moments X, Y, C, S (N, 4) of stored particles (see :func:`particle_tick`)."""
    for i in range(p.shape[0]):
        _moments(p, w, i, moments)


@njit(cache=True)
def particle_covariance(p, w, delta, estimate, out):
    """Weighted covariance (N, 3, 3) of the particles ``p * delta`` about ``estimate``,
    heading deviations wrapped; ``1e-10`` on the diagonal keeps it invertible when all
    particles coincide."""
    for i in range(p.shape[0]):
        for a in range(3):
            for b in range(3):
                out[i, a, b] = 1e-10 if a == b else 0.0
        for j in range(p.shape[1]):
            x, y, h = compose_one(p[i, j, 0], p[i, j, 1], p[i, j, 2], delta[i, 0], delta[i, 1], delta[i, 2])
            d0 = x - estimate[i, 0]
            d1 = y - estimate[i, 1]
            d2 = wrap_near(h - estimate[i, 2])
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
