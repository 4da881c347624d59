"""Ray casts against wall segments: the simulator's range sensors and the estimators' model.

Walls are plain arrays ``segments`` (S, 4): x0, y0, x1, y1 [m], field frame (a field's
boundary edges, then its obstacles' edges). The same compiled code serves both sides of the
import rule: :mod:`sim.field` and :mod:`sim.sensors` cast the true rays with it, and the
estimators cast the rays they expect from a pose estimate (they receive the segments from
the runner's ``field`` context, never a :mod:`sim` object).

A ray from ``o`` along ``d = [cos a, sin a]`` meets the segment ``p + u e`` (``0 <= u <= 1``)
at distance ``t = ((p - o) x e) / (d x e)`` (the 2-D cross product ``a x b = ax by - ay bx``;
O'Rourke, *Computational Geometry in C*, 1998, §7.2, segment intersection by parameters).
The tests compare the numerators with ``d x e`` (no division); only a nearer crossing is
divided out.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.se2 import compose_one


#: A crossing up to this fraction of a segment's length past either end still counts: a ray
#: through the corner two walls share then meets one of them however the rounding falls
#: (with exact end tests, rays aimed at a corner of a box escaped it about once in 150).
END_SLACK = 1e-12

#: Rays cast together by :func:`ray_cast_kernel`, one segment at a time (fits in L1 cache).
RAY_BLOCK = 128


@njit(cache=True, inline="always")
def nearer_crossing(
    x0: float, y0: float, x1: float, y1: float, ox: float, oy: float, dx: float, dy: float,
    best: float,
) -> tuple[bool, float, float]:
    """Whether the ray from ``(ox, oy)`` along the unit ``(dx, dy)`` crosses the segment
    ``(x0, y0)-(x1, y1)`` nearer than ``best``, without dividing.

    With ``den = d x e``, ``t = tn / den`` and ``u = un / den``: ``t >= 0``,
    ``0 <= u <= 1`` (give or take ``END_SLACK``) and ``t < best`` are tested on the
    numerators against ``den`` and its sign. A ray parallel to the segment
    (``|den| <= 1e-15``) never crosses it.

    Returns
    -------
    nearer : bool
    tn, den : float — the distance is ``tn / den`` [m] (divide only when ``nearer``)
    """
    ex = x1 - x0
    ey = y1 - y0
    den = dx * ey - dy * ex
    wx = x0 - ox
    wy = y0 - oy
    # origin + t d = p0 + u e  ->  t = (w x e) / (d x e), u = (w x d) / (d x e)
    tn = wx * ey - wy * ex
    un = wx * dy - wy * dx
    slack = END_SLACK * den
    if den > 1e-15:
        nearer = tn >= 0.0 and un >= -slack and un <= den + slack and tn < best * den
    elif den < -1e-15:  # every inequality turns round
        nearer = tn <= 0.0 and un <= -slack and un >= den + slack and tn > best * den
    else:
        nearer = False
    return nearer, tn, den


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
        nearer, tn, den = nearer_crossing(
            segs[j, 0], segs[j, 1], segs[j, 2], segs[j, 3], ox, oy, dx, dy, best
        )
        if nearer:
            best = tn / den
            hit = j
    return best, hit


@njit(cache=True, error_model="numpy")
def _ray_block(segs, ox, oy, dx, dy, best, m):
    # segment by segment over the block's first m rays: LLVM vectorises the inner loop (the
    # numpy error model leaves out the zero-division check, which would be an early exit)
    for j in range(segs.shape[0]):
        x0, y0, x1, y1 = segs[j, 0], segs[j, 1], segs[j, 2], segs[j, 3]
        for i in range(m):
            b = best[i]
            nearer, tn, den = nearer_crossing(x0, y0, x1, y1, ox[i], oy[i], dx[i], dy[i], b)
            best[i] = tn / den if nearer else b


@njit(cache=True)
def ray_cast_kernel(segs, origin, direction, max_range, out):
    """First crossing of each ray with the wall segments.

    The same tests in the same order as :func:`ray_hit_one` (so the same distances, bit
    for bit), run over blocks of ``RAY_BLOCK`` rays a segment at a time.

    Parameters
    ----------
    segs : ndarray, shape (S, 4) — walls [m], field frame
    origin : ndarray, shape (K, 2) — ray starts [m], field frame
    direction : ndarray, shape (K,) — ray angles [rad], field frame
    max_range : float — distances beyond it come back as ``inf``
    out : ndarray, shape (K,) — written: distance [m]
    """
    k = origin.shape[0]
    if k * segs.shape[0] < 256:  # too few tests to pay for the block's scratch space
        for i in range(k):
            d = direction[i]
            best, _ = ray_hit_one(segs, origin[i, 0], origin[i, 1], np.cos(d), np.sin(d))
            out[i] = best if best <= max_range else np.inf
        return
    scratch = np.empty((5, RAY_BLOCK))
    ox, oy, dx, dy, best = scratch[0], scratch[1], scratch[2], scratch[3], scratch[4]
    for start in range(0, k, RAY_BLOCK):
        m = min(RAY_BLOCK, k - start)
        for i in range(m):
            ox[i] = origin[start + i, 0]
            oy[i] = origin[start + i, 1]
            dx[i] = np.cos(direction[start + i])
            dy[i] = np.sin(direction[start + i])
            best[i] = np.inf
        _ray_block(segs, ox, oy, dx, dy, best, m)
        for i in range(m):
            out[start + i] = best[i] if best[i] <= max_range else np.inf


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
