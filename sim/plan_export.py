"""Write a plan out for people: a CSV of reference states and a PNG of path and speed.

These are outputs, not robot code, so they live in :mod:`sim`. A simulated plan does not
make a real robot safe: drive new routes at reduced speed first, in a clear area, with a
stop within reach, and follow the site's safety rules.
"""

from __future__ import annotations

import os
from collections.abc import Callable

import numpy as np

from planners.plan import Plan

CSV_COLUMNS = ("t", "x", "y", "heading", "vx", "vy", "omega", "ax", "ay", "alpha",
               "curvature", "s")

# Okabe-Ito colours, one per limit, so the plot reads without colour vision
_LIMIT_STYLE = {
    "max_speed": ("#000000", "max_speed"),
    "max_lateral_accel": ("#E69F00", "lateral accel"),
    "max_turn_rate": ("#56B4E9", "turn rate"),
    "wheel_speed": ("#009E73", "wheel speed"),
    "speed_cap": ("#CC79A7", "waypoint cap"),
}


def plan_table(plan: Plan) -> np.ndarray:
    """The plan's reference states, one row per control tick, shape (T, 12).

    Columns as :data:`CSV_COLUMNS`: t [s]; x, y [m], heading [rad] (field frame); vx, vy
    [m/s], omega [rad/s] (body frame); ax, ay [m/s^2], alpha [rad/s^2] (time derivatives of
    the body-frame velocity components); curvature [1/m]; s [m].
    """
    return np.column_stack([plan.t, plan.pose, plan.velocity, plan.accel, plan.curvature,
                            plan.s])


def write_plan_csv(plan: Plan, path: str | os.PathLike) -> None:
    """Write the plan as CSV: a header line, then one row per control tick (SI units)."""
    np.savetxt(path, plan_table(plan), delimiter=",", fmt="%.9g",
               header=",".join(CSV_COLUMNS), comments="")


def write_plan_plot(
    plan: Plan,
    path: str | os.PathLike,
    *,
    free_space=None,
    background: Callable[[object], None] | None = None,
    title: str = "",
) -> None:
    """Draw the path coloured by planned speed, and the speed profile under each limit.

    Parameters
    ----------
    plan : Plan — from :func:`planners.timing.time_route` (its ``notes`` give the limits)
    path : path-like — PNG file to write
    free_space : shapely Polygon or MultiPolygon, optional — outline drawn behind the path
    background : callable, optional — ``background(ax)`` draws a field on the path axis
    title : str
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.collections import LineCollection

    speed_t = np.hypot(plan.velocity[:, 0], plan.velocity[:, 1])
    fig, (ax, bx) = plt.subplots(1, 2, figsize=(13, 5.5), gridspec_kw={"width_ratios": [1, 1.3]})
    if background is not None:
        background(ax)
    if free_space is not None:
        for poly in getattr(free_space, "geoms", [free_space]):
            for ring in [poly.exterior, *poly.interiors]:
                xy = np.asarray(ring.coords)
                ax.plot(xy[:, 0], xy[:, 1], color="#555555", lw=1.2)
    # path coloured by the speed at which it is driven
    speed_s = np.interp(plan.path_s, plan.s, speed_t) if len(plan.s) > 1 else plan.path_s * 0
    pts = np.column_stack([plan.path_x, plan.path_y])
    seg = np.stack([pts[:-1], pts[1:]], axis=1)
    lc = LineCollection(seg, cmap="viridis", linewidths=2.5)
    lc.set_array(0.5 * (speed_s[:-1] + speed_s[1:]))
    ax.add_collection(lc)
    fig.colorbar(lc, ax=ax, label="speed [m/s]", shrink=0.8)
    wp_s = np.asarray(plan.notes.get("waypoints_s", [plan.path_s[0], plan.path_s[-1]]))
    wx, wy = np.interp(wp_s, plan.path_s, plan.path_x), np.interp(wp_s, plan.path_s, plan.path_y)
    ax.plot(wx[1:], wy[1:], "o", mfc="white", mec="black", ms=6, label="waypoints")
    ax.plot(wx[:1], wy[:1], "s", color="black", ms=6, label="start")
    for stop in plan.notes.get("stops", []):
        if stop["why"] in ("cusp", "corner", "dwell"):
            x, y = np.interp(stop["s"], plan.path_s, plan.path_x), np.interp(
                stop["s"], plan.path_s, plan.path_y)
            ax.plot(x, y, "x", color="#D55E00", ms=9, mew=2)
            ax.annotate(stop["why"], (x, y), textcoords="offset points", xytext=(6, 6),
                        fontsize=8, color="#D55E00")
    ax.autoscale_view()
    ax.set_aspect("equal")
    ax.set_xlabel("x [m]")
    ax.set_ylabel("y [m]")
    ax.legend(loc="best", fontsize=8)
    ax.set_title(title or "path")
    limits = plan.notes.get("speed_limits")
    top = 1.15 * max(float(speed_t.max(initial=0.0)), 1e-3)
    if limits is not None:
        s = limits["s"]
        for key, (colour, label) in _LIMIT_STYLE.items():
            v = np.asarray(limits.get(key, []), dtype=float)
            if v.size == 0 or not np.isfinite(v).any():
                continue
            if key == "speed_cap":
                caps = np.isfinite(v)
                bx.plot(s[caps], v[caps], "v", color=colour, ms=7, label=label)
            else:
                bx.plot(s, np.minimum(v, 10.0 * top), color=colour, lw=1, ls="--", label=label)
        top = max(top, 1.15 * float(np.max(limits["max_speed"])))
    bx.plot(plan.s, speed_t, color="#0072B2", lw=2, label="planned speed")
    for s_w in wp_s[1:-1]:
        bx.axvline(s_w, color="#bbbbbb", lw=0.6, zorder=0)
    bx.set_ylim(0.0, top)
    bx.set_xlim(0.0, max(plan.length, 1e-9))
    bx.set_xlabel("arc length s [m]")
    bx.set_ylabel("speed [m/s]")
    bx.grid(alpha=0.3)
    bx.legend(loc="upper right", fontsize=8)
    bx.set_title(f"{plan.length:.2f} m in {plan.duration:.2f} s")
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
