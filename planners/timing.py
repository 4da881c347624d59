"""Time a route's path: the fastest speed schedule under the robot's limits -> Plan.

The speed ``v(s) >= 0`` along the path is as large as possible subject to

* upper bounds at each arc length: ``max_speed``; ``v^2 |kappa| <= max_lateral_accel``;
  ``|d heading/ds| v <= max_turn_rate``; no wheel faster than ``wheel_speed_margin *
  max_wheel_speed`` (the wheel speeds of the unit-speed body twist come from the chassis'
  inverse kinematics, which is linear in the twist, and include the heading rate of a
  strafing mecanum); waypoint speed caps; rest at the start, cusps, dwells and the end;
* ``-max_decel <= dv/dt <= max_accel`` along the path.

In ``b = v^2`` these are linear (``dv/dt = (db/ds) / 2``), and the largest feasible ``b``
on a grid is found by one forward and one backward pass (the problem is the convex one of
Verscheure et al., IEEE TAC 2009, and Lipp & Boyd, Int. J. Control 2014; with box bounds on
``db/ds`` its solution is the pointwise maximum). Between grid points the acceleration is
constant, so time follows exactly: ``dt = 2 ds / (v_i + v_{i+1})``.

With ``max_jerk``, each rest-to-rest stretch is smoothed by a moving average of width
``W`` in time (position, speed and acceleration alike): acceleration stays within its
bounds, jerk is at most (largest change of acceleration across ``W``) / ``W``, chosen
``<= max_jerk``. Where the average would exceed a speed bound, the bound is lowered over the
distance the window spans and the stretch is timed again.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numba import njit

from planners.errors import PlanError, format_value
from planners.plan import Plan
from planners.profiles import Profile, piecewise_profile
from planners.routes import CHASSIS, Route, RoutePath, route_path

__all__ = ["time_route", "plan_summary", "speed_bounds"]


@njit(cache=True)
def _forward_backward(bmax, s, accel, decel, out):
    m = s.shape[0]
    out[0] = bmax[0]
    for i in range(m - 1):  # b' <= 2 accel
        out[i + 1] = min(bmax[i + 1], out[i] + 2.0 * accel * (s[i + 1] - s[i]))
    for i in range(m - 2, -1, -1):  # -b' <= 2 decel
        out[i] = min(out[i], out[i + 1] + 2.0 * decel * (s[i + 1] - s[i]))


@njit(cache=True)
def _lower(bmax, s, centre, reach, factor):
    # bmax *= the smallest factor[k] whose reach covers it
    scale = np.ones(bmax.shape[0])
    for k in range(centre.shape[0]):
        lo = np.searchsorted(s, centre[k] - reach[k])
        hi = np.searchsorted(s, centre[k] + reach[k], side="right")
        for i in range(lo, hi):
            scale[i] = min(scale[i], factor[k])
    for i in range(bmax.shape[0]):
        bmax[i] *= scale[i]


def speed_bounds(
    rp: RoutePath,
    route: Route,
    s: np.ndarray,
    *,
    inverse_kinematics: Callable[[np.ndarray], np.ndarray] | None = None,
    max_wheel_speed: float | None = None,
) -> dict[str, np.ndarray]:
    """Upper bounds on the path speed at arc lengths ``s``, one array per limit.

    Parameters
    ----------
    rp : RoutePath
    route : Route — its limits
    s : ndarray, shape (M,) — arc length [m]
    inverse_kinematics : callable, optional — body twist (N, 3) -> wheel speeds (N, W) [rad/s]
    max_wheel_speed : float, optional — free speed of a wheel (motor free speed / gear ratio)
        [rad/s]

    Returns
    -------
    dict of str -> ndarray, shape (M,)
        ``max_speed``, ``max_lateral_accel``, ``max_turn_rate`` and ``wheel_speed`` [m/s]
        (``inf`` where a limit does not bind or is not given). Caps and stops are applied
        by :func:`time_route`.
    """
    smp = rp.evaluate(s)
    with np.errstate(divide="ignore"):
        out = {
            "max_speed": np.full(len(s), route.max_speed),
            "max_lateral_accel": np.sqrt(route.lateral_accel / np.abs(smp.geometry.curvature)),
            "max_turn_rate": (np.inf * np.ones(len(s)) if route.max_turn_rate is None
                              else route.max_turn_rate / np.abs(smp.heading_rate)),
        }
        out["wheel_speed"] = np.full(len(s), np.inf)
        if inverse_kinematics is not None:
            rel = smp.geometry.direction - smp.heading
            twist = np.stack([np.cos(rel), np.sin(rel), smp.heading_rate], axis=1)
            w = np.asarray(inverse_kinematics(twist), dtype=np.float64)
            w2 = np.asarray(inverse_kinematics(2.0 * twist[:8]), dtype=np.float64)
            if w.shape[0] != len(s) or not np.allclose(w2, 2.0 * w[:8], rtol=1e-9, atol=1e-12):
                raise PlanError("time_route: inverse_kinematics must map (N, 3) body twists "
                                "linearly to (N, W) wheel speeds")
            peak = np.max(np.abs(w), axis=1)
            out["wheel_speed"] = route.wheel_speed_margin * max_wheel_speed / peak
    return out


def _stretches(s: np.ndarray, b: np.ndarray, stop_idx: np.ndarray) -> list[Profile]:
    """One constant-acceleration profile per rest-to-rest stretch of the grid."""
    out = []
    for i0, i1 in zip(stop_idx[:-1], stop_idx[1:]):
        ss, bb = s[i0:i1 + 1], b[i0:i1 + 1]
        v = np.sqrt(bb)
        ds = np.diff(ss)
        out.append(piecewise_profile(ss[:-1], v[:-1], np.diff(bb) / (2.0 * ds),
                                     2.0 * ds / (v[:-1] + v[1:])))
    return out


def time_route(
    route: Route,
    *,
    chassis: str,
    rate: float,
    inverse_kinematics: Callable[[np.ndarray], np.ndarray] | None = None,
    max_wheel_speed: float | None = None,
    grid_step: float = 0.005,
) -> Plan:
    """Smooth and time a route: the fastest plan the chassis can drive, at the control rate.

    Parameters
    ----------
    route : Route
    chassis : str — "mecanum", "skid" or "differential"
    rate : float — control rate [Hz]; ``plan.t[k] == k / rate``
    inverse_kinematics : callable, optional — body twist (N, 3) [m/s, m/s, rad/s] -> wheel
        speeds (N, W) [rad/s]; with ``max_wheel_speed`` it bounds every wheel's speed
    max_wheel_speed : float, optional — free speed of the wheels (motor free speed through
        the gearbox) [rad/s]; the plan uses ``route.wheel_speed_margin`` of it
    grid_step : float — arc-length step of the timing grid [m]

    Returns
    -------
    Plan
        Ends at rest at the last waypoint; dwells are stationary samples. ``notes`` holds
        ``binding`` (which limit binds where), ``speed_limits`` (grid arrays for plots),
        ``waypoints_s``, ``stops``, ``jerk_window_s``.

    Raises
    ------
    PlanError
        For a route the chassis cannot drive (see :func:`planners.routes.route_path`), a
        bad rate, or wheel limits given without inverse kinematics (or the other way round).
    """
    if chassis not in CHASSIS:
        route_path(route, chassis=chassis)  # raises with the choices
    try:
        ok = np.isfinite(float(rate)) and float(rate) > 0.0
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise PlanError(f"time_route: rate must be > 0 Hz, got {format_value(rate)}")
    if (inverse_kinematics is None) != (max_wheel_speed is None):
        raise PlanError("time_route: inverse_kinematics and max_wheel_speed must be given "
                        "together, got only one")
    if max_wheel_speed is not None and not max_wheel_speed > 0.0:
        raise PlanError(f"time_route: max_wheel_speed must be > 0, got {max_wheel_speed!r}")
    route = route.scaled()  # route.speed_scale: the same route, time-scaled
    rp = route_path(route, chassis=chassis)
    s = rp.path.grid(grid_step)
    mid = 0.5 * (s[1:] + s[:-1])
    kw = {"inverse_kinematics": inverse_kinematics, "max_wheel_speed": max_wheel_speed}
    at_grid = speed_bounds(rp, route, s, **kw)
    at_mid = speed_bounds(rp, route, mid, **kw)
    bounds = {}
    for key, g in at_grid.items():  # a grid point carries the lower bound of its two cells
        m = at_mid[key]
        bounds[key] = np.minimum(g, np.minimum(np.r_[m[:1], m], np.r_[m, m[-1:]]))
    knot_idx = np.searchsorted(s, rp.knot_s)
    caps = np.full(len(s), np.inf)
    caps[knot_idx] = rp.speed_cap
    bounds["speed_cap"] = caps
    vmax = np.min(np.stack(list(bounds.values())), axis=0)
    stop_idx = knot_idx[rp.stops]
    bmax = vmax**2
    bmax[stop_idx] = 0.0
    b = np.empty_like(bmax)
    _forward_backward(bmax, s, route.max_accel, route.decel, b)
    stretches = _stretches(s, b, stop_idx)
    windows = [0.0] * len(stretches)
    if route.max_jerk is not None:
        stretches, windows, b, bmax = _limit_jerk(route, s, vmax, bmax, b, stop_idx)
    dt = 1.0 / rate
    t, s_t, v_t, a_t = _sample(stretches, windows, rp.dwell[rp.stops][1:], dt)
    plan = _assemble(rp, s, dt, t, s_t, v_t, a_t)
    labels = _labels(bounds, vmax, bmax, b, s, route.max_accel, route.decel)
    plan.notes.update(
        binding=_binding_intervals(s, labels, plan),
        speed_limits={"s": s, "speed": np.sqrt(b), **bounds},
        waypoints_s=rp.knot_s.tolist(),
        waypoint_labels=list(rp.labels),
        stops=[{"s": float(rp.knot_s[i]), "at": rp.labels[i],
                "why": "start" if i == 0 else "end" if i == len(rp.knot_s) - 1
                else ("cusp" if rp.heading_mode == "tangent" else "corner")
                if rp.path.breaks[i] else "dwell",
                "dwell_s": float(rp.dwell[i])} for i in rp.stops],
        jerk_window_s=windows,
        chassis=chassis,
        heading=rp.heading_mode,
        limits={"max_speed": route.max_speed, "max_accel": route.max_accel,
                "max_decel": route.decel, "max_lateral_accel": route.lateral_accel,
                "max_turn_rate": route.max_turn_rate, "max_jerk": route.max_jerk,
                "max_wheel_speed": (None if max_wheel_speed is None
                                    else route.wheel_speed_margin * max_wheel_speed)},
    )
    return plan


def _jerk_window(prof: Profile, jerk: float, accel: float, decel: float) -> float:
    """Averaging window [s] after which the profile's jerk is at most ``jerk``."""
    w = max(accel, decel) / jerk
    for _ in range(6):
        need = prof.accel_change(w) / jerk
        if need <= w * (1.0 + 1e-9):
            return w
        w = need
    return (accel + decel) / jerk  # a change of acceleration never exceeds accel + decel


def _limit_jerk(route, s, vmax, bmax, b, stop_idx):
    """Smooth every stretch to the jerk limit, lowering speed bounds where needed."""
    a, d, j = route.max_accel, route.decel, route.max_jerk
    bmax = bmax.copy()
    for _ in range(40):
        stretches = _stretches(s, b, stop_idx)
        windows = [_jerk_window(p, j, a, d) for p in stretches]
        centre, reach, value = [], [], []
        for p, w, i0, i1 in zip(stretches, windows, stop_idx[:-1], stop_idx[1:]):
            # speed of the averaged motion as it passes each grid point
            tau = np.linspace(0.0, p.duration + w, max(64, int((p.duration + w) / 0.002)))
            q, v, _ = p.averaged(w, tau)
            inner = slice(i0 + 1, i1)
            v_at = np.interp(s[inner], q, v)
            over = np.flatnonzero(v_at > vmax[inner] * (1.0 + 1e-6))
            centre.append(s[inner][over])
            reach.append(1.05 * w * v_at[over])  # the window spans w * (its mean speed)
            value.append(vmax[inner][over] / v_at[over])
        centre = np.concatenate(centre)
        if centre.size == 0:
            return stretches, windows, b, bmax
        # lower the bounds the window spans by the square of the excess (and a little more)
        _lower(bmax, s, centre, np.concatenate(reach),
               (np.concatenate(value) * (1.0 - 1e-4)) ** 2)
        _forward_backward(bmax, s, a, d, b)
    raise PlanError("time_route: max_jerk smoothing did not settle under the speed bounds; "
                    "raise max_jerk or lower max_speed")


def _sample(stretches, windows, dwells, dt):
    """Path position, speed and acceleration at the ticks ``k * dt``; ``dwells[i]`` follows
    stretch ``i`` (the last one holds at the end)."""
    length = [p.duration + w for p, w in zip(stretches, windows)]
    starts = np.concatenate([[0.0], np.cumsum(np.add(length[:-1], dwells[:-1]))])
    total = starts[-1] + length[-1] + dwells[-1]
    t = np.arange(int(np.ceil(total / dt - 1e-9)) + 1) * dt
    k = np.clip(np.searchsorted(starts, t, side="right") - 1, 0, len(stretches) - 1)
    s_t, v_t, a_t = np.empty_like(t), np.empty_like(t), np.empty_like(t)
    for i, (p, w) in enumerate(zip(stretches, windows)):
        sel = k == i
        s_t[sel], v_t[sel], a_t[sel] = p.averaged(w, t[sel] - starts[i])
    return t, s_t, np.maximum(v_t, 0.0), a_t


def _labels(bounds, vmax, bmax, b, s, accel, decel) -> list[str]:
    """Name of the limit that holds the speed in each grid cell, shape (M - 1,)."""
    names = list(bounds)
    which = np.argmin(np.stack([bounds[k] for k in names]), axis=0)
    ds = np.diff(s)
    db = np.diff(b)
    tol = 1e-9 * (1.0 + b[1:])
    capped = ((bounds["speed_cap"] <= vmax) & np.isfinite(bounds["speed_cap"])
              & (b >= bmax * (1.0 - 1e-9)) & (bmax > 0.0))
    out = []
    for i in range(len(ds)):
        if abs(db[i] - 2.0 * accel * ds[i]) < tol[i]:
            out.append("max_accel")
        elif abs(db[i] + 2.0 * decel * ds[i]) < tol[i]:
            out.append("max_decel")
        else:  # on a bound: name the one that holds the later end
            k = i + 1 if b[i + 1] >= bmax[i + 1] * (1.0 - 1e-9) else i
            jerk = bmax[k] < vmax[k] ** 2 * (1.0 - 1e-9)
            out.append("max_jerk" if jerk else names[which[k]])
        if capped[i] and i > 0:
            out[-1] = "speed_cap@" + out[-1]
    return out


def _assemble(rp: RoutePath, s_grid, dt, t, s, v, a) -> Plan:
    """Reference states at the ticks from path speed ``v`` and acceleration ``a``."""
    smp = rp.evaluate(s)
    geo = smp.geometry
    rel = geo.direction - smp.heading
    c, sn = np.cos(rel), np.sin(rel)
    vel = np.stack([v * c, v * sn, smp.heading_rate * v], axis=1)
    # d/dt of the body components: a (c, s) + v^2 (kappa - heading') (-s, c)
    turn = v**2 * (geo.curvature - smp.heading_rate)
    acc = np.stack([a * c - turn * sn, a * sn + turn * c,
                    smp.heading_accel * v**2 + smp.heading_rate * a], axis=1)
    pose = np.column_stack([geo.xy, smp.heading])
    path_geo = rp.path.evaluate(s_grid)
    return Plan(
        dt=dt, t=t, pose=pose, velocity=vel, accel=acc, curvature=geo.curvature, s=s,
        path_x=np.ascontiguousarray(path_geo.xy[:, 0]),
        path_y=np.ascontiguousarray(path_geo.xy[:, 1]),
        path_s=np.ascontiguousarray(s_grid), path_heading=np.unwrap(path_geo.direction),
        notes={},
    )


def _binding_intervals(s: np.ndarray, labels: list[str], plan: Plan) -> list[dict]:
    """Runs of grid cells held by the same limit, with their arc-length and time spans."""
    out: list[dict] = []
    for i, name in enumerate(labels):
        if name.startswith("speed_cap@"):  # a cap holds one point: a run of no length
            out.append({"limit": "speed_cap", "s_start": float(s[i]), "s_end": float(s[i])})
            name = name.split("@", 1)[1]
        if out and out[-1]["limit"] == name:
            out[-1]["s_end"] = float(s[i + 1])
        else:
            out.append({"limit": name, "s_start": float(s[i]), "s_end": float(s[i + 1])})
    for run in out:
        for key in ("start", "end"):
            k = min(np.searchsorted(plan.s, run[f"s_{key}"] - 1e-12), len(plan.t) - 1)
            run[f"t_{key}"] = float(plan.t[k])
    return out


def plan_summary(plan: Plan) -> dict:
    """The facts ``skidpad plan`` prints about a plan, in SI.

    Returns
    -------
    dict
        ``length_m``, ``duration_s``, ``peak_speed_mps``, ``mean_speed_mps``,
        ``peak_turn_rate_radps``, ``peak_lateral_accel_mps2``, ``peak_accel_mps2``,
        ``peak_decel_mps2``, ``stops`` (list), ``binding`` (list of runs: ``limit``,
        ``s_start``, ``s_end``, ``t_start``, ``t_end``), ``time_share`` (fraction of the
        moving time each limit holds the speed) and ``limits``.
    """
    vx, vy = plan.velocity[:, 0], plan.velocity[:, 1]
    speed = np.hypot(vx, vy)
    with np.errstate(invalid="ignore", divide="ignore"):
        tang = np.where(speed > 0.0, (plan.accel[:, 0] * vx + plan.accel[:, 1] * vy) / speed, 0.0)
    binding = plan.notes.get("binding", [])
    share: dict[str, float] = {}
    for run in binding:
        share[run["limit"]] = share.get(run["limit"], 0.0) + run["t_end"] - run["t_start"]
    busy = sum(share.values())
    return {
        "length_m": plan.length,
        "duration_s": plan.duration,
        "peak_speed_mps": float(speed.max(initial=0.0)),
        "mean_speed_mps": plan.length / plan.duration if plan.duration > 0 else 0.0,
        "peak_turn_rate_radps": float(np.abs(plan.velocity[:, 2]).max(initial=0.0)),
        "peak_lateral_accel_mps2": float((speed**2 * np.abs(plan.curvature)).max(initial=0.0)),
        "peak_accel_mps2": float(tang.max(initial=0.0)),
        "peak_decel_mps2": float(-tang.min(initial=0.0)),
        "stops": plan.notes.get("stops", []),
        "binding": binding,
        "time_share": {k: v / busy for k, v in share.items()} if busy > 0 else {},
        "limits": plan.notes.get("limits", {}),
    }
