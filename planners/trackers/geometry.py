"""Compiled path look-ups shared by the geometric trackers (pure pursuit, Stanley).

Scalar numba functions over the plan's arc-length samples (``path_s``, ``path_x``,
``path_y``, ``path_heading``), called from the trackers' batch kernels.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from planners.plan import Plan, project


@njit(cache=True, inline="always")
def segment_index(ps: np.ndarray, s: float) -> int:
    """Index j of the segment ``ps[j] <= s <= ps[j + 1]`` (clipped to the path)."""
    lo, hi = 0, ps.shape[0] - 2
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if ps[mid] <= s:
            lo = mid
        else:
            hi = mid - 1
    return lo


@njit(cache=True, inline="always")
def path_point(
    ps: np.ndarray, px: np.ndarray, py: np.ndarray, ph: np.ndarray, s: float
) -> tuple[float, float, float]:
    """Point and direction of travel at arc length ``s`` (clipped), linear between samples."""
    j = segment_index(ps, s)
    span = ps[j + 1] - ps[j]
    u = 0.0 if span <= 0.0 else min(1.0, max(0.0, (s - ps[j]) / span))
    return (
        px[j] + u * (px[j + 1] - px[j]),
        py[j] + u * (py[j + 1] - py[j]),
        ph[j] + u * (ph[j + 1] - ph[j]),
    )


@njit(cache=True)
def circle_crossing(
    ps: np.ndarray,
    px: np.ndarray,
    py: np.ndarray,
    end_heading: float,
    s: float,
    qx: float,
    qy: float,
    radius: float,
) -> tuple[float, float]:
    """First path point at distance ``radius`` from ``q``, walking forward from arc length ``s``.

    The walk starts at the path point at ``s``; if that point is already ``radius`` or more
    away it is returned. If the path ends inside the circle, the path is extended past its
    end along ``end_heading`` (the final direction of travel) and the crossing of that ray is
    returned, so a tracker steering there arrives aligned with the end of the path.
    The walk skips ahead safely: distance to ``q`` changes no faster than arc length, so from
    a point at distance ``d < radius`` no crossing lies within ``radius - d`` of path.
    """
    m = ps.shape[0]
    j = segment_index(ps, s)
    sa = min(max(s, ps[0]), ps[m - 1])
    span = ps[j + 1] - ps[j]
    u = 0.0 if span <= 0.0 else min(1.0, max(0.0, (sa - ps[j]) / span))
    ax = px[j] + u * (px[j + 1] - px[j])
    ay = py[j] + u * (py[j + 1] - py[j])
    r2 = radius * radius
    d2 = (ax - qx) ** 2 + (ay - qy) ** 2
    if d2 >= r2:
        return ax, ay
    while True:
        skip = sa + (radius - np.sqrt(d2))
        if skip > ps[j + 1]:
            if skip >= ps[m - 1]:
                break
            j = segment_index(ps, skip)
            sa = skip
            span = ps[j + 1] - ps[j]
            u = 0.0 if span <= 0.0 else min(1.0, max(0.0, (sa - ps[j]) / span))
            ax = px[j] + u * (px[j + 1] - px[j])
            ay = py[j] + u * (py[j + 1] - py[j])
            d2 = (ax - qx) ** 2 + (ay - qy) ** 2
            if d2 >= r2:
                return ax, ay
            continue
        bx = px[j + 1]
        by = py[j + 1]
        if (bx - qx) ** 2 + (by - qy) ** 2 >= r2:
            # |f + w e| = radius on the segment a -> b, with |f| < radius: the larger root
            fx = ax - qx
            fy = ay - qy
            ex = bx - ax
            ey = by - ay
            ee = ex * ex + ey * ey
            fe = fx * ex + fy * ey
            disc = fe * fe - ee * (fx * fx + fy * fy - r2)
            w = (-fe + np.sqrt(max(disc, 0.0))) / ee if ee > 0.0 else 1.0
            w = min(1.0, max(0.0, w))
            return ax + w * ex, ay + w * ey
        if j + 1 >= m - 1:
            break
        j += 1
        sa = ps[j]
        ax = bx
        ay = by
        d2 = (ax - qx) ** 2 + (ay - qy) ** 2
    # the end lies inside the circle: |f + u e| = radius on the ray end + u e, u >= 0
    ex = np.cos(end_heading)
    ey = np.sin(end_heading)
    fx = px[m - 1] - qx
    fy = py[m - 1] - qy
    fe = fx * ex + fy * ey
    u = -fe + np.sqrt(max(fe * fe - (fx * fx + fy * fy) + r2, 0.0))
    return px[m - 1] + u * ex, py[m - 1] + u * ey


def path_curvature(plan: Plan) -> np.ndarray:
    """Curvature of the path at its arc-length samples, d(heading)/ds, shape (M,) [1/m]."""
    if plan.path_s.shape[0] < 2:
        return np.zeros_like(plan.path_s)
    return np.ascontiguousarray(np.gradient(plan.path_heading, plan.path_s))


def search_window(speed: float, dt: float) -> tuple[float, float]:
    """Projection window (back, ahead) [m] for a tick: ten ticks of travel plus margins."""
    return 0.02, 0.05 + 10.0 * abs(speed) * dt


class Progress:
    """Arc-length progress of N points along a plan, kept between ticks.

    Parameters
    ----------
    plan : Plan
    n : int — batch size
    s0 : float — arc length where the search starts [m]
    """

    def __init__(self, plan: Plan, n: int, *, s0: float = 0.0) -> None:
        self.plan = plan
        self.s = np.full(int(n), float(s0))

    def update(self, points: np.ndarray, *, back: float = 0.05, ahead: float = 0.5) -> np.ndarray:
        """Project ``points`` (N, 2) near the previous progress; returns signed cross-track (N,).

        ``back`` and ``ahead`` [m] bound the search around the previous progress (the cost of
        a tick is proportional to their sum): a few ticks of travel is enough once the points
        are on their way.
        """
        s, d = project(self.plan, points, self.s, back=back, ahead=ahead)
        self.s = s
        return d
