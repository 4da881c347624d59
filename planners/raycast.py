"""Ray casts against wall segments: the simulator's range sensors and the estimators' model.

Walls are plain arrays ``segments`` (S, 4): x0, y0, x1, y1 [m], field frame (a field's
boundary edges, then its obstacles' edges). The same compiled code serves both sides of the
import rule: :mod:`sim.field` and :mod:`sim.sensors` cast the true rays with it, and the
estimators cast the rays they expect from a pose estimate (they receive the segments from
the runner's ``field`` context, never a :mod:`sim` object).

A ray from ``o`` along ``d = [cos a, sin a]`` meets the segment ``p + u e`` (``0 <= u <= 1``)
at distance ``t = ((p - o) x e) / (d x e)`` (the 2-D cross product ``a x b = ax by - ay bx``;
O'Rourke, *Computational Geometry in C*, 1998, §7.2, segment intersection by parameters).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.se2 import compose_one


@njit(cache=True, inline="always")
def ray_hit_one(segs: np.ndarray, ox: float, oy: float, dx: float, dy: float) -> tuple[float, int]:
    """Distance to the first segment hit from ``(ox, oy)`` along the unit ``(dx, dy)``.

    Returns
    -------
    distance : float — [m], ``inf`` when no segment is hit
    segment : int — row of ``segs`` hit, -1 when none
    """
    best = np.inf
    hit = -1
    for j in range(segs.shape[0]):
        ex = segs[j, 2] - segs[j, 0]
        ey = segs[j, 3] - segs[j, 1]
        den = dx * ey - dy * ex
        if abs(den) < 1e-15:
            continue
        wx = segs[j, 0] - ox
        wy = segs[j, 1] - oy
        # origin + t d = a + u e  ->  t = (w x e) / (d x e), u = (w x d) / (d x e)
        t = (wx * ey - wy * ex) / den
        u = (wx * dy - wy * dx) / den
        if t >= 0.0 and 0.0 <= u <= 1.0 and t < best:
            best = t
            hit = j
    return best, hit


@njit(cache=True)
def ray_cast_kernel(segs, origin, direction, max_range, out):
    """First crossing of each ray with the wall segments.

    Parameters
    ----------
    segs : ndarray, shape (S, 4) — walls [m], field frame
    origin : ndarray, shape (K, 2) — ray starts [m], field frame
    direction : ndarray, shape (K,) — ray angles [rad], field frame
    max_range : float — distances beyond it come back as ``inf``
    out : ndarray, shape (K,) — written: distance [m]
    """
    for i in range(origin.shape[0]):
        best, _ = ray_hit_one(segs, origin[i, 0], origin[i, 1], np.cos(direction[i]), np.sin(direction[i]))
        out[i] = best if best <= max_range else np.inf


@njit(cache=True, inline="always")
def beam_one(
    segs: np.ndarray, x: float, y: float, h: float, mx: float, my: float, mh: float
) -> tuple[float, float, float, float]:
    """Expected range of a beam mounted at ``(mx, my, mh)`` on a robot at ``(x, y, h)``, and
    its gradient with respect to the pose.

    With the hit wall taken as its infinite line (the gradient of the hit segment; a pose
    change that moves the hit past the segment's end changes the segment, which no
    derivative sees): origin ``o = (x, y) + R(h) (mx, my)``, direction ``a = h + mh``,
    ``t = ((p - o) x e) / (d x e)``, so ``dt/do = [-ey, ex] / (d x e)`` and
    ``dt/da = t (d . e) / (d x e)``, and ``do/dh = [-(oy - y), ox - x]``.

    Returns
    -------
    t : float — expected range [m] (``inf`` when no wall is hit)
    gx, gy, gh : float — dt/dx, dt/dy [-], dt/dh [m/rad] (0 when nothing is hit)
    """
    ox, oy, a = compose_one(x, y, h, mx, my, mh)
    dx = np.cos(a)
    dy = np.sin(a)
    t, j = ray_hit_one(segs, ox, oy, dx, dy)
    if j < 0:
        return np.inf, 0.0, 0.0, 0.0
    ex = segs[j, 2] - segs[j, 0]
    ey = segs[j, 3] - segs[j, 1]
    den = dx * ey - dy * ex
    gx = -ey / den
    gy = ex / den
    ga = t * (dx * ex + dy * ey) / den
    return t, gx, gy, gx * (y - oy) + gy * (ox - x) + ga


@njit(cache=True)
def _beams_kernel(segs, pose, mounts, out, grad):
    for i in range(pose.shape[0]):
        for k in range(mounts.shape[0]):
            t, gx, gy, gh = beam_one(
                segs, pose[i, 0], pose[i, 1], pose[i, 2], mounts[k, 0], mounts[k, 1], mounts[k, 2]
            )
            out[i, k] = t
            grad[i, k, 0] = gx
            grad[i, k, 1] = gy
            grad[i, k, 2] = gh


def expected_ranges(
    segments: np.ndarray, pose: np.ndarray, mounts: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Expected range of every beam from every pose, and its gradient.

    Parameters
    ----------
    segments : ndarray, shape (S, 4) — walls [m], field frame
    pose : ndarray, shape (N, 3) — x [m], y [m], heading [rad], field frame
    mounts : ndarray, shape (R, 3) — beam start x, y [m] and direction [rad], body frame

    Returns
    -------
    ranges : ndarray, shape (N, R) — [m], no maximum applied (``inf`` when no wall is hit)
    gradient : ndarray, shape (N, R, 3) — d range / d pose [-, -, m/rad]

    Examples
    --------
    A robot at the centre of a 4 m square looking along +x sees the east wall 2 m away:

    >>> box = np.array([[0, 0, 4, 0], [4, 0, 4, 4], [4, 4, 0, 4], [0, 4, 0, 0.0]])
    >>> r, g = expected_ranges(box, np.array([[2.0, 2.0, 0.0]]), np.zeros((1, 3)))
    >>> float(r[0, 0]), g[0, 0].round(6).tolist()
    (2.0, [-1.0, 0.0, 0.0])
    """
    segments = np.ascontiguousarray(segments, dtype=np.float64).reshape(-1, 4)
    pose = np.ascontiguousarray(pose, dtype=np.float64).reshape(-1, 3)
    mounts = np.ascontiguousarray(mounts, dtype=np.float64).reshape(-1, 3)
    out = np.empty((pose.shape[0], mounts.shape[0]))
    grad = np.empty((pose.shape[0], mounts.shape[0], 3))
    _beams_kernel(segments, pose, mounts, out, grad)
    return out, grad
