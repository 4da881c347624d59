"""Compiled steps of the ``ekf`` estimator: one call per control tick for the whole batch.

Every step works on one robot's row (its pose, covariance, heading cosine and sine), so a
robot's numbers do not depend on the batch it runs in; :func:`ekf_tick` loops over the
robots. The equations are in the docstring of :mod:`planners.estimators.ekf`.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.raycast import beam_one
from planners.se2 import wrap_one


@njit(cache=True, inline="always")
def increment_variances(noise, ux, uy, ut):
    """Body-frame variances (along, across, heading) of one increment ``(ux, uy, ut)``.

    ``noise`` (7,): distance^2, lateral^2, turn^2, drift^2 noise, gyro variance per tick
    (negative: no gyro), position floor^2, heading floor^2.
    """
    d = np.sqrt(ux * ux + uy * uy)
    q0 = noise[0] * d + noise[5]
    q1 = noise[1] * d + noise[5]
    if noise[4] < 0.0:
        q2 = noise[2] * abs(ut) + noise[3] * d + noise[6]
    else:
        q2 = noise[4] + noise[2] * abs(ut) + noise[6]
    return q0, q1, q2


@njit(cache=True, inline="always")
def wrap_near(a):
    """``a`` wrapped to (-pi, pi]: one add for ``|a| < 3 pi`` (a sum of two wrapped angles),
    :func:`planners.se2.wrap_one` beyond."""
    if a > np.pi:
        return a - 2.0 * np.pi if a <= 3.0 * np.pi else wrap_one(a)
    if a <= -np.pi:
        return a + 2.0 * np.pi if a > -3.0 * np.pi else wrap_one(a)
    return a


_R6, _R12, _R20, _R30, _R42, _R56 = 1 / 6, 1 / 12, 1 / 20, 1 / 30, 1 / 42, 1 / 56


@njit(cache=True, inline="always")
def turn_cos_sin(u):
    """``cos u``, ``sin u``; by their Taylor series (exact to double precision) below 0.02 rad,
    where one tick's turn nearly always is (the first terms left out, ``u^8 / 8!`` and
    ``u^9 / 9!``, are under 1e-18 of the result)."""
    if abs(u) < 0.02:
        u2 = u * u
        # Horner form, multiplications by the reciprocals (no division in the chain)
        return (
            1.0 - u2 * 0.5 * (1.0 - u2 * _R12 * (1.0 - u2 * _R30 * (1.0 - u2 * _R56))),
            u * (1.0 - u2 * _R6 * (1.0 - u2 * _R20 * (1.0 - u2 * _R42))),
        )
    return np.cos(u), np.sin(u)


@njit(cache=True, inline="always")
def predict_one(p, P, cs, i, ux, uy, ut, q0, q1, q2):
    """Row ``i`` of ``p`` (N, 3), ``P`` (N, 3, 3) in place: ``x' = x * u``,
    ``P' = F_x P F_x' + F_u Q_u F_u'`` with ``F_x = I + [a, b, 0]' e3'``.

    ``cs`` (N, 2) holds the cosine and sine of each robot's heading; it is turned by ``ut``
    (angle sum), so a prediction calls no trigonometric function for a small turn.
    """
    c = cs[i, 0]
    s = cs[i, 1]
    a = -s * ux - c * uy
    b = c * ux - s * uy
    p00, p01, p02 = P[i, 0, 0], P[i, 0, 1], P[i, 0, 2]
    p11, p12, p22 = P[i, 1, 1], P[i, 1, 2], P[i, 2, 2]
    # F_u diag(q0, q1, q2) F_u' with F_u = R(theta) (+) 1
    cq = c * s * (q0 - q1)
    n01 = p01 + a * p12 + b * p02 + a * b * p22 + cq
    n02 = p02 + a * p22
    n12 = p12 + b * p22
    P[i, 0, 0] = p00 + 2.0 * a * p02 + a * a * p22 + (c * c * q0 + s * s * q1)
    P[i, 1, 1] = p11 + 2.0 * b * p12 + b * b * p22 + (s * s * q0 + c * c * q1)
    P[i, 2, 2] = p22 + q2
    P[i, 0, 1] = n01
    P[i, 1, 0] = n01
    P[i, 0, 2] = n02
    P[i, 2, 0] = n02
    P[i, 1, 2] = n12
    P[i, 2, 1] = n12
    p[i, 0] += c * ux - s * uy
    p[i, 1] += s * ux + c * uy
    p[i, 2] = wrap_near(p[i, 2] + ut)
    cu, su = turn_cos_sin(ut)
    cs[i, 0] = c * cu - s * su
    cs[i, 1] = s * cu + c * su


@njit(cache=True, inline="always")
def set_heading_cos_sin(p, cs, i):
    """``cs[i]`` from the heading itself (after an update moved it)."""
    cs[i, 0] = np.cos(p[i, 2])
    cs[i, 1] = np.sin(p[i, 2])


@njit(cache=True)
def fix_update(p, P, z, r, gate, work):
    """Gated Kalman update by a fix (``H = I``, ``R = diag(r)``) in place.

    ``S = P + R``; the fix is rejected (False, nothing changed) when its squared Mahalanobis
    distance ``nu' S^-1 nu`` exceeds ``gate``; else ``K = P S^-1``, ``x += K nu``,
    ``P = (I - K) P (I - K)' + K R K'`` (Joseph form). ``work`` (3, 3, 3) is scratch space.
    """
    Si, K, A = work[0], work[1], work[2]
    s00, s01, s02 = P[0, 0] + r[0], P[0, 1], P[0, 2]
    s11, s12, s22 = P[1, 1] + r[1], P[1, 2], P[2, 2] + r[2]
    # S^-1 = adj(S) / det(S), S symmetric
    a00 = s11 * s22 - s12 * s12
    a01 = s02 * s12 - s01 * s22
    a02 = s01 * s12 - s02 * s11
    a11 = s00 * s22 - s02 * s02
    a12 = s01 * s02 - s00 * s12
    a22 = s00 * s11 - s01 * s01
    inv = 1.0 / (s00 * a00 + s01 * a01 + s02 * a02)
    n0 = z[0] - p[0]
    n1 = z[1] - p[1]
    n2 = wrap_one(z[2] - p[2])
    d2 = (a00 * n0 * n0 + a11 * n1 * n1 + a22 * n2 * n2
          + 2.0 * (a01 * n0 * n1 + a02 * n0 * n2 + a12 * n1 * n2)) * inv
    if not d2 <= gate:
        return False
    Si[0, 0], Si[0, 1], Si[0, 2] = a00 * inv, a01 * inv, a02 * inv
    Si[1, 0], Si[1, 1], Si[1, 2] = Si[0, 1], a11 * inv, a12 * inv
    Si[2, 0], Si[2, 1], Si[2, 2] = Si[0, 2], Si[1, 2], a22 * inv
    for a in range(3):
        for b in range(3):
            K[a, b] = P[a, 0] * Si[0, b] + P[a, 1] * Si[1, b] + P[a, 2] * Si[2, b]
    for a in range(3):
        p[a] += K[a, 0] * n0 + K[a, 1] * n1 + K[a, 2] * n2
    p[2] = wrap_one(p[2])
    # A = (I - K) P, then P = A (I - K)' + K R K'
    for a in range(3):
        for b in range(3):
            A[a, b] = P[a, b] - (K[a, 0] * P[0, b] + K[a, 1] * P[1, b] + K[a, 2] * P[2, b])
    for a in range(3):
        for b in range(a, 3):
            v = A[a, b] - (A[a, 0] * K[b, 0] + A[a, 1] * K[b, 1] + A[a, 2] * K[b, 2])
            v += K[a, 0] * r[0] * K[b, 0] + K[a, 1] * r[1] * K[b, 1] + K[a, 2] * r[2] * K[b, 2]
            P[a, b] = v
            P[b, a] = v
    return True


@njit(cache=True, inline="always")
def range_updates(p, P, segs, mounts, z, var, gate):
    """Scalar updates by each beam's range ``z`` (R,) (skipped where not finite), in place.

    ``h`` = gradient of the expected range (:func:`planners.raycast.beam_one`),
    ``s = h P h' + var``; a beam with ``nu^2 / s > gate`` is rejected; otherwise
    ``K = P h' / s``, ``x += K nu``, ``P = P - K (P h')' - (P h') K' + s K K'`` (the Joseph
    form written out for a scalar measurement). Returns the number of rejected beams.
    """
    rejected = 0
    for k in range(mounts.shape[0]):
        if not np.isfinite(z[k]):
            continue
        t, g0, g1, g2 = beam_one(segs, p[0], p[1], p[2], mounts[k, 0], mounts[k, 1], mounts[k, 2])
        if not np.isfinite(t):
            continue
        h0 = P[0, 0] * g0 + P[0, 1] * g1 + P[0, 2] * g2
        h1 = P[1, 0] * g0 + P[1, 1] * g1 + P[1, 2] * g2
        h2 = P[2, 0] * g0 + P[2, 1] * g1 + P[2, 2] * g2
        s = g0 * h0 + g1 * h1 + g2 * h2 + var[k]
        nu = z[k] - t
        if not nu * nu <= gate * s:
            rejected += 1
            continue
        k0, k1, k2 = h0 / s, h1 / s, h2 / s
        p[0] += k0 * nu
        p[1] += k1 * nu
        p[2] = wrap_one(p[2] + k2 * nu)
        ks = (k0, k1, k2)
        hs = (h0, h1, h2)
        for a in range(3):
            for b in range(a, 3):
                v = P[a, b] - ks[a] * hs[b] - hs[a] * ks[b] + s * ks[a] * ks[b]
                P[a, b] = v
                P[b, a] = v
    return rejected


@njit(cache=True, inline="always")
def _store(pose, cov, i, hist, j):
    # ring slot j of robot i <- pose, covariance (upper triangle); the increment is kept
    hist[j, i, 0], hist[j, i, 1], hist[j, i, 2] = pose[i, 0], pose[i, 1], pose[i, 2]
    hist[j, i, 3], hist[j, i, 4], hist[j, i, 5] = cov[i, 0, 0], cov[i, 0, 1], cov[i, 0, 2]
    hist[j, i, 6], hist[j, i, 7], hist[j, i, 8] = cov[i, 1, 1], cov[i, 1, 2], cov[i, 2, 2]


@njit(cache=True, inline="always")
def _load(hist, i, j, p, P):
    p[0], p[1], p[2] = hist[j, i, 0], hist[j, i, 1], hist[j, i, 2]
    P[0, 0], P[0, 1], P[0, 2] = hist[j, i, 3], hist[j, i, 4], hist[j, i, 5]
    P[1, 0], P[1, 1], P[1, 2] = hist[j, i, 4], hist[j, i, 6], hist[j, i, 7]
    P[2, 0], P[2, 1], P[2, 2] = hist[j, i, 5], hist[j, i, 7], hist[j, i, 8]


@njit(cache=True)
def ekf_tick(
    t, dt, step, pose, cov, cs, noise, h_time, slot, filled, hist, h_range,
    fix, fix_valid, fix_time, fix_var, gate, replay, reacquire, streak, rejected,
    ranges, range_valid, segs, mounts, range_var, range_gate, range_rejected, replay_back, work,
):
    """One tick of the EKF for every robot: predict, range updates, late fix with replay.

    Parameters
    ----------
    t : float — time of the tick [s]; dt : float — control period [s]
    step : ndarray (N, 3) — odometry increment of this tick, body frame [m, m, rad]
    pose, cov : ndarray (N, 3), (N, 3, 3) — the estimate, updated in place
    cs : ndarray (N, 2) — cosine and sine of each estimated heading, kept in step
    noise : ndarray (7,) — see :func:`increment_variances`
    h_time : ndarray (H,) — ring of tick times (``h_time[slot] = t`` is written here)
    slot, filled : int — ring slot of this tick, slots in use (this one included)
    hist : ndarray (H, N, 12) — per tick in the ring and robot: posterior pose (3),
        covariance upper triangle P00 P01 P02 P11 P12 P22 (6), odometry increment (3)
    h_range : ndarray (H, N, R) — ranges of each tick in the ring (NaN: none)
    fix, fix_valid, fix_time : ndarray (N, 3), (N,), (N,) — fixes (shape (0, ...) when none)
    fix_var : ndarray (3,) — fix variances [m^2, m^2, rad^2]
    gate : float — chi-square threshold of a fix (3 dof)
    replay : bool — attach a late fix to the tick it describes and re-apply the later ticks
    reacquire : int — rejected fixes in a row after which the next fix is taken as the pose
    streak, rejected : ndarray (N,) int — rejections in a row, rejections in total
    ranges, range_valid : ndarray (N, R) — beam ranges [m] and flags (shape (N, 0): none used)
    segs : ndarray (S, 4) — walls; mounts : ndarray (R, 3); range_var : ndarray (R,) [m^2]
    range_gate : float — chi-square threshold of a beam (1 dof)
    range_rejected : ndarray (N,) int — beams rejected in total
    replay_back : ndarray (N,) int — scratch: ticks each robot re-applies after its fix
    work : ndarray (5, 3, 3) — scratch space
    """
    depth = h_time.shape[0]
    h_time[slot] = t
    n_beams = ranges.shape[1]
    has_fix = fix_valid.shape[0] > 0
    wp = work[4, 0]
    wP = work[3]
    last_stamp = np.nan
    last_back = 0
    most = 0
    for i in range(pose.shape[0]):
        ux, uy, ut = step[i, 0], step[i, 1], step[i, 2]
        q0, q1, q2 = increment_variances(noise, ux, uy, ut)
        predict_one(pose, cov, cs, i, ux, uy, ut, q0, q1, q2)
        hist[slot, i, 9], hist[slot, i, 10], hist[slot, i, 11] = ux, uy, ut
        replay_back[i] = 0
        if n_beams:
            for k in range(n_beams):
                h_range[slot, i, k] = ranges[i, k] if range_valid[i, k] else np.nan
            range_rejected[i] += range_updates(
                pose[i], cov[i], segs, mounts, h_range[slot, i], range_var, range_gate
            )
            set_heading_cos_sin(pose, cs, i)
        _store(pose, cov, i, hist, slot)
        if not has_fix or not fix_valid[i]:
            continue
        if not (np.isfinite(fix[i, 0]) and np.isfinite(fix[i, 1]) and np.isfinite(fix[i, 2])):
            continue
        # the ring slot the fix describes: the tick nearest its time stamp
        back = 0
        stamp = fix_time[i] if fix_time.shape[0] else t
        if replay and np.isfinite(stamp) and stamp < t:
            if stamp < h_time[(slot - filled + 1) % depth] - 0.5 * dt:
                rejected[i] += 1  # older than the history: nothing to attach it to
                continue
            if stamp == last_stamp:
                back = last_back  # robots of one batch share their fix times
            else:
                while back + 1 < filled:
                    newer = h_time[(slot - back) % depth]
                    older = h_time[(slot - back - 1) % depth]
                    if older < stamp:
                        if stamp - older <= newer - stamp:
                            back += 1
                        break
                    back += 1
                last_stamp = stamp
                last_back = back
        j = (slot - back) % depth
        if streak[i] >= reacquire:
            wp[0], wp[1], wp[2] = fix[i, 0], fix[i, 1], wrap_one(fix[i, 2])
            for a in range(3):
                for b in range(3):
                    wP[a, b] = fix_var[a] if a == b else 0.0
        else:
            _load(hist, i, j, wp, wP)
            if not fix_update(wp, wP, fix[i], fix_var, gate, work):
                rejected[i] += 1
                streak[i] += 1
                continue
        streak[i] = 0
        for a in range(3):
            pose[i, a] = wp[a]
            for b in range(3):
                cov[i, a, b] = wP[a, b]
        _store(pose, cov, i, hist, j)
        set_heading_cos_sin(pose, cs, i)
        replay_back[i] = back
        most = max(most, back)
    # re-apply the ticks after each fix's own: tick by tick over the robots, so that one
    # robot's chain of dependent steps interleaves with the others'
    for b in range(most - 1, -1, -1):
        k = (slot - b) % depth
        for i in range(pose.shape[0]):
            if replay_back[i] <= b:
                continue
            ux, uy, ut = hist[k, i, 9], hist[k, i, 10], hist[k, i, 11]
            q0, q1, q2 = increment_variances(noise, ux, uy, ut)
            predict_one(pose, cov, cs, i, ux, uy, ut, q0, q1, q2)
            if n_beams:
                range_rejected[i] += range_updates(
                    pose[i], cov[i], segs, mounts, h_range[k, i], range_var, range_gate
                )
                set_heading_cos_sin(pose, cs, i)
            _store(pose, cov, i, hist, k)
