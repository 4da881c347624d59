"""The plan: a path plus its speed schedule in time, sampled at the control rate.

:func:`planners.timing.time_route` makes a :class:`Plan`; trackers read reference states
from it and project the robot onto its path; scoring measures errors against it.

Two samplings live side by side:

* in time, one row per control tick ``k`` at ``t = k * dt``: ``pose``, body ``velocity`` and
  ``accel``, ``curvature`` and arc length ``s``;
* in arc length, the path geometry ``path_x``, ``path_y`` (separate contiguous arrays so the
  compiled projection streams through them), ``path_s`` and ``path_heading`` (direction of
  travel).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numba import njit

from planners.se2 import wrap


_AT_REST = np.zeros(3)
_AT_REST.setflags(write=False)


@dataclass(frozen=True, eq=False)
class Plan:
    """A timed reference for one route.

    Attributes
    ----------
    dt : float — control period [s]; ``t[k] == k * dt`` exactly
    t : ndarray, shape (T,) — time [s]
    pose : ndarray, shape (T, 3) — x [m], y [m], heading [rad], field frame
    velocity : ndarray, shape (T, 3) — vx [m/s], vy [m/s], omega [rad/s], body frame
    accel : ndarray, shape (T, 3) — ax [m/s^2], ay [m/s^2], alpha [rad/s^2], body frame
        (time derivative of ``velocity``, the body-frame components)
    curvature : ndarray, shape (T,) — path curvature at the reference point [1/m]
    s : ndarray, shape (T,) — arc length travelled along the path [m], non-decreasing
    path_x, path_y : ndarray, shape (M,) — path points by arc length, field frame [m]
    path_s : ndarray, shape (M,) — arc length of those points [m], increasing
    path_heading : ndarray, shape (M,) — direction of travel along the path [rad],
        continuous (unwrapped) so it can be interpolated
    notes : dict — free-form facts about how the plan was made (binding limits, ...)
    """

    dt: float
    t: np.ndarray
    pose: np.ndarray
    velocity: np.ndarray
    accel: np.ndarray
    curvature: np.ndarray
    s: np.ndarray
    path_x: np.ndarray
    path_y: np.ndarray
    path_s: np.ndarray
    path_heading: np.ndarray
    notes: dict = field(default_factory=dict)

    @cached_property
    def segments(self) -> np.ndarray:
        """The path packed for the compiled projection (:func:`segment_block`), (6, M)."""
        return segment_block(self.path_x, self.path_y, self.path_s)

    @property
    def duration(self) -> float:
        """Time of the last reference sample [s]."""
        return float(self.t[-1])

    @property
    def length(self) -> float:
        """Path length [m]."""
        return float(self.path_s[-1])

    @property
    def final_pose(self) -> np.ndarray:
        """Last reference pose, shape (1, 3)."""
        return self.pose[-1:].copy()

    def index(self, t: np.ndarray | float) -> np.ndarray:
        """Tick index of time ``t``, clipped to the plan, shape like ``t``."""
        k = np.rint(np.asarray(t, dtype=np.float64) / self.dt).astype(np.int64)
        return np.clip(k, 0, len(self.t) - 1)

    def at(self, t: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Reference pose, body velocity and body acceleration at one time ``t``.

        As :meth:`sample` for a single time, without the batch: rows of the plan's own arrays
        (read-only views; copy before changing), the final pose at rest past the end.

        Returns
        -------
        pose, velocity, accel : ndarray, each shape (3,)
        """
        last = len(self.t) - 1
        k = min(max(int(t / self.dt + 0.5), 0), last)
        if t > self.t[last]:
            return self.pose[last], _AT_REST, _AT_REST
        return self.pose[k], self.velocity[k], self.accel[k]

    def sample(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Reference pose, body velocity and body acceleration at times ``t``.

        Times past the end hold the final pose at rest.

        Parameters
        ----------
        t : ndarray, shape (N,) — time [s]

        Returns
        -------
        pose, velocity, accel : ndarray, each shape (N, 3)
        """
        t = np.atleast_1d(np.asarray(t, dtype=np.float64))
        k = self.index(t)
        done = t > self.t[-1]
        vel = self.velocity[k].copy()
        acc = self.accel[k].copy()
        vel[done] = 0.0
        acc[done] = 0.0
        return self.pose[k].copy(), vel, acc


def segment_block(x: np.ndarray, y: np.ndarray, s: np.ndarray) -> np.ndarray:
    """A polyline packed for :func:`project_one`, shape (6, M).

    Rows: point x, y [m], arc length s [m], and for segment j (point j to j + 1) its vector
    ex, ey [m] and ``1 / (ex^2 + ey^2)`` [1/m^2] (0 for a zero-length segment and in the
    last column), so the search divides nowhere.
    """
    x, y, s = (np.asarray(v, dtype=np.float64) for v in (x, y, s))
    out = np.zeros((6, len(x)))
    out[0], out[1], out[2] = x, y, s
    out[3, :-1] = np.diff(x)
    out[4, :-1] = np.diff(y)
    ll = out[3] ** 2 + out[4] ** 2
    np.divide(1.0, ll, out=out[5], where=ll > 0.0)
    return out


@njit(cache=True)
def project_one(seg, qx, qy, s_prev, back, ahead):
    """Arc length and signed distance of the nearest path point to ``(qx, qy)`` whose arc
    length lies in ``[s_prev - back, s_prev + ahead]`` (the scalar core of :func:`project`;
    ``seg`` from :func:`segment_block`)."""
    px, py, ps = seg[0], seg[1], seg[2]
    m = px.shape[0]
    lo_s = s_prev - back
    hi_s = s_prev + ahead
    # first segment whose end lies past lo_s: a walk from where even spacing would put it
    # (the plan's points are close to evenly spaced, so the walk is a step or two; it is
    # exact for any increasing ps), the end segment when none (a window past either end
    # still searches the end segment)
    lo = 0
    if m > 2 and ps[m - 1] > ps[0]:
        lo = int(min(max((lo_s - ps[0]) * ((m - 1) / (ps[m - 1] - ps[0])), 0.0), m - 2.0))
    while lo > 0 and ps[lo] >= lo_s:
        lo -= 1
    while lo < m - 2 and ps[lo + 1] < lo_s:
        lo += 1
    # last segment of the window: those that start at or before hi_s (at least lo)
    hi = lo
    while hi + 1 < m - 1 and ps[hi + 1] <= hi_s:
        hi += 1
    best = np.inf
    best_j = lo
    best_u = 0.0
    for j in range(lo, min(hi + 1, m - 1)):
        # branch-free: the nearest point of segment j, kept by selects
        wx = qx - px[j]
        wy = qy - py[j]
        u = min(1.0, max(0.0, (wx * seg[3, j] + wy * seg[4, j]) * seg[5, j]))
        cx = u * seg[3, j] - wx
        cy = u * seg[4, j] - wy
        dist2 = cx * cx + cy * cy
        nearer = dist2 < best
        best = dist2 if nearer else best
        best_j = j if nearer else best_j
        best_u = u if nearer else best_u
    if m < 2 or not best < np.inf:  # a single point, or a point that is not finite
        return ps[0], 0.0
    j = best_j
    # signed: positive when the point lies left of the direction of travel
    cross = seg[3, j] * (qy - py[j]) - seg[4, j] * (qx - px[j])
    d = np.sqrt(best)
    return ps[j] + best_u * (ps[j + 1] - ps[j]), d if cross >= 0.0 else -d


@njit(cache=True)
def _project_kernel(seg, points, s_prev, back, ahead, s_out, d_out):
    for i in range(points.shape[0]):
        s_out[i], d_out[i] = project_one(seg, points[i, 0], points[i, 1], s_prev[i], back, ahead)


def project(
    plan: Plan,
    points: np.ndarray,
    s_prev: np.ndarray,
    *,
    back: float = 0.05,
    ahead: float = 0.5,
) -> tuple[np.ndarray, np.ndarray]:
    """Project points onto the plan's path, searching only near earlier progress.

    The search window ``[s_prev - back, s_prev + ahead]`` moves forward with the robot, so
    a path that comes back near itself does not make the projection jump to a later or
    earlier pass.

    Parameters
    ----------
    plan : Plan
    points : ndarray, shape (N, 2) — x, y [m], field frame
    s_prev : ndarray, shape (N,) — arc length of the previous projection [m]
    back, ahead : float — window behind and ahead of ``s_prev`` [m]

    Returns
    -------
    s : ndarray, shape (N,) — arc length of the nearest path point in the window [m]
    cross_track : ndarray, shape (N,) — signed distance [m], positive left of travel
    """
    points = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 2)
    s_prev = np.ascontiguousarray(s_prev, dtype=np.float64).reshape(-1)
    s_out = np.empty(points.shape[0])
    d_out = np.empty(points.shape[0])
    _project_kernel(plan.segments, points, s_prev, back, ahead, s_out, d_out)
    return s_out, d_out


def path_state(plan: Plan, s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Path point and direction of travel at arc lengths ``s``.

    Parameters
    ----------
    plan : Plan
    s : ndarray, shape (N,) — arc length [m]

    Returns
    -------
    x, y, heading : ndarray, each shape (N,) — field frame [m, m, rad]
    """
    s = np.clip(np.asarray(s, dtype=np.float64), plan.path_s[0], plan.path_s[-1])
    x = np.interp(s, plan.path_s, plan.path_x)
    y = np.interp(s, plan.path_s, plan.path_y)
    return x, y, wrap(np.interp(s, plan.path_s, plan.path_heading))
