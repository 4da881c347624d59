"""Check a plan against the field: the smoothed path must keep clear of walls and obstacles.

The waypoints may all lie on open floor while the spline between them swings wide, so
the check runs on the plan's path samples, not the waypoints. It lives in :mod:`sim`
because :mod:`planners` does not know the field.
"""

from __future__ import annotations

import numpy as np
import shapely

from planners.errors import PlanError
from planners.plan import Plan


def path_clearance(plan: Plan, free_space) -> np.ndarray:
    """Signed distance from each path sample to the edge of the free space.

    Parameters
    ----------
    plan : Plan
    free_space : shapely Polygon or MultiPolygon — floor the robot's centre may cross
        (field boundary less obstacles), field frame [m]

    Returns
    -------
    ndarray, shape (M,) — [m], positive inside the free space, negative outside
    """
    x, y = plan.path_x, plan.path_y
    d = shapely.distance(free_space.boundary, shapely.points(x, y))
    inside = shapely.contains_xy(free_space, x, y)
    return np.where(inside, d, -d)


def check_plan_clearance(plan: Plan, free_space, *, half_width: float) -> None:
    """Raise unless the whole path keeps ``half_width`` from every wall and obstacle.

    Parameters
    ----------
    plan : Plan
    free_space : shapely Polygon or MultiPolygon — see :func:`path_clearance`
    half_width : float — half the robot's width [m]

    Raises
    ------
    PlanError
        Naming where the path comes closest (arc length, point, the waypoints around it)
        and by how much.
    """
    clear = path_clearance(plan, free_space)
    bad = clear < half_width - 1e-9
    if not bad.any():
        return
    # report the first stretch that is too close, at its closest point
    first = int(np.argmax(bad))
    end = first + int(np.argmin(bad[first:])) if not bad[first:].all() else len(bad)
    k = first + int(np.argmin(clear[first:end]))
    s = float(plan.path_s[k])
    wp_s = np.asarray(plan.notes.get("waypoints_s", []), dtype=float)
    names = plan.notes.get("waypoint_labels", [])
    where = ""
    if wp_s.size >= 2 and len(names) == wp_s.size:
        i = int(np.clip(np.searchsorted(wp_s, s, side="right") - 1, 0, wp_s.size - 2))
        where = f", between {names[i]} and {names[i + 1]}"
    what = "leaves the free space by" if clear[k] < 0.0 else "comes within"
    raise PlanError(
        f"route: smoothed path must keep {half_width:.3f} m (half the robot's width) from "
        f"walls and obstacles, got a path that {what} {abs(clear[k]):.3f} m of the edge at "
        f"s = {s:.2f} m (x {plan.path_x[k]:.3f}, y {plan.path_y[k]:.3f}){where}, over "
        f"{plan.path_s[end - 1] - plan.path_s[first]:.2f} m of path; move the waypoints "
        "in or add one there")
