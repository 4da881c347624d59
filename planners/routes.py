"""A route: the scripted list of points to drive, with its limits; and its path.

:class:`Route` and :class:`Waypoint` are plain SI data (the scenario loader in
:mod:`sim.scenario` fills them from the ``[route]`` table, checking every key against the
:class:`~planners.params.Param` declared in each field's metadata).

:func:`route_path` turns a route into a :class:`RoutePath`: the smoothed path through the
start and the waypoints (:func:`planners.paths.spline_path`) with its heading plan:

* ``tangent``: the body faces the direction of travel (backwards on ``reverse`` legs); a
  waypoint ``heading`` fixes the path's direction there. Skid and differential chassis
  always plan this way.
* ``hold`` (mecanum): the body keeps the start heading; the path's directions are chosen
  from the points.
* ``blend`` (mecanum): the heading goes from the start heading to each waypoint's heading
  target in turn, ``theta = theta_a + wrap(theta_b - theta_a) * h(sigma)`` with ``sigma``
  the arc-length fraction between the targets and ``h = 10 sigma^3 - 15 sigma^4 +
  6 sigma^5`` (zero heading rate and rate-of-change at each target); after the last target
  it holds. Waypoints without a heading are passed through.

A joint where ``reverse`` changes between the leg arriving and the leg leaving is a cusp:
the robot stops there and drives the next leg the other way (backwards on ``reverse``
legs). With ``hold`` or ``blend`` the body does not face the path, so such a joint is a
corner instead: the mecanum robot stops there and sets off in the next leg's direction.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from planners.errors import PlanError, did_you_mean, format_value
from planners.params import REQUIRED, Param
from planners.paths import Path, PathSample, spline_path
from planners.se2 import wrap


def _p(**kw) -> dict:
    return {"param": Param(**kw)}


@dataclass(frozen=True)
class Waypoint:
    """One point of a route.

    Attributes
    ----------
    at : tuple of 2 float — x, y [m], field frame
    heading : float or None — heading target [rad] (holonomic) or path tangent (others)
    speed : float or None — speed cap near this point [m/s]
    dwell : float — stop and wait here [s]
    reverse : bool — the leg that ends here is driven backwards
    """

    at: tuple[float, float] = field(metadata=_p(dimension="length", shape=2, doc="x, y of the point"))
    heading: float | None = field(
        default=None, metadata=_p(dimension="angle", default=None, doc="heading target or tangent")
    )
    speed: float | None = field(
        default=None, metadata=_p(dimension="speed", default=None, gt=0.0, doc="speed cap near here")
    )
    dwell: float = field(
        default=0.0, metadata=_p(dimension="time", default=0.0, ge=0.0, doc="stop and wait here")
    )
    reverse: bool = field(
        default=False,
        metadata=_p(dimension="bool", default=False, doc="drive the leg ending here backwards"),
    )


@dataclass(frozen=True)
class Route:
    """A route and its limits, in SI.

    Attributes
    ----------
    start : tuple of 3 float — x [m], y [m], heading [rad], field frame
    heading : str — "tangent", "hold" or "blend" (mecanum may strafe; others "tangent")
    max_speed, max_accel, max_decel, max_lateral_accel : float — [m/s], [m/s^2]
    max_jerk : float or None — [m/s^3]
    max_turn_rate : float or None — [rad/s]
    wheel_speed_margin : float — fraction of the wheel's free speed the plan may use
    speed_scale : float — time scaling of the route's limits (see :meth:`Route.scaled`)
    waypoints : tuple of Waypoint
    """

    start: tuple[float, float, float] = field(
        metadata=_p(dimension="pose", shape=3, doc="x, y, heading of the start")
    )
    heading: str = field(
        default="tangent",
        metadata=_p(
            dimension="choice",
            default="tangent",
            choices=("tangent", "hold", "blend"),
            doc="heading plan (hold and blend need a mecanum chassis)",
        ),
    )
    max_speed: float = field(default=REQUIRED, metadata=_p(dimension="speed", gt=0.0, doc="top speed"))
    max_accel: float = field(
        default=REQUIRED, metadata=_p(dimension="acceleration", gt=0.0, doc="acceleration limit")
    )
    max_decel: float | None = field(
        default=None,
        metadata=_p(dimension="acceleration", default=None, gt=0.0, doc="braking limit (default max_accel)"),
    )
    max_lateral_accel: float | None = field(
        default=None,
        metadata=_p(
            dimension="acceleration", default=None, gt=0.0, doc="v^2 * curvature limit (default max_accel)"
        ),
    )
    max_jerk: float | None = field(
        default=None, metadata=_p(dimension="jerk", default=None, gt=0.0, doc="jerk limit (optional)")
    )
    max_turn_rate: float | None = field(
        default=None,
        metadata=_p(dimension="angular_speed", default=None, gt=0.0, doc="heading-rate limit (optional)"),
    )
    wheel_speed_margin: float = field(
        default=0.85,
        metadata=_p(
            dimension="dimensionless", default=0.85, gt=0.0, le=1.0,
            doc="fraction of the wheels' free speed the plan may ask for",
        ),
    )
    speed_scale: float = field(
        default=1.0,
        metadata=_p(
            dimension="dimensionless", default=1.0, gt=0.0, le=5.0,
            doc="drive the route this many times faster: speeds x c, accelerations x c^2, jerk x c^3",
        ),
    )
    waypoints: tuple[Waypoint, ...] = field(
        default=(), metadata=_p(dimension="tables", default=(), doc="the points to drive")
    )

    def scaled(self) -> Route:
        """This route with ``speed_scale`` folded into its limits (``speed_scale`` 1 after).

        Time scaling of a trajectory by ``c`` (Hollerbach, "Dynamic scaling of manipulator
        trajectories", 1984): the same path driven ``c`` times faster needs speeds and turn
        rates times ``c``, accelerations times ``c^2`` and jerk times ``c^3``. Dwells keep
        their length. The wheels' free speed (a property of the motor) is not scaled, so above
        ``c = 1`` it may bind where it did not.
        """
        c = self.speed_scale
        if c == 1.0:
            return self

        def times(v: float | None, k: float) -> float | None:
            return None if v is None else v * k

        waypoints = tuple(
            dataclasses.replace(w, speed=times(w.speed, c)) for w in self.waypoints
        )
        return dataclasses.replace(
            self, max_speed=self.max_speed * c, max_accel=self.max_accel * c * c,
            max_decel=times(self.max_decel, c * c), max_lateral_accel=times(self.max_lateral_accel, c * c),
            max_jerk=times(self.max_jerk, c ** 3), max_turn_rate=times(self.max_turn_rate, c),
            speed_scale=1.0, waypoints=waypoints,
        )

    @property
    def decel(self) -> float:
        """Braking limit [m/s^2] (``max_decel`` or ``max_accel``)."""
        return self.max_decel if self.max_decel is not None else self.max_accel

    @property
    def lateral_accel(self) -> float:
        """Lateral acceleration limit [m/s^2] (``max_lateral_accel`` or ``max_accel``)."""
        return self.max_lateral_accel if self.max_lateral_accel is not None else self.max_accel


CHASSIS = ("mecanum", "skid", "differential")


class RouteSample(NamedTuple):
    """Path geometry and heading plan at arc lengths ``s`` (leading axis N)."""

    geometry: PathSample
    leg: np.ndarray  # (N,) int, index of the leg (segment)
    heading: np.ndarray  # (N,) body heading [rad], wrapped
    heading_rate: np.ndarray  # (N,) d heading / ds [rad/m]
    heading_accel: np.ndarray  # (N,) d^2 heading / ds^2 [rad/m^2]


@dataclass(frozen=True, eq=False)
class RoutePath:
    """A route's smoothed path with its heading plan.

    Attributes
    ----------
    path : Path — through the start and every waypoint
    chassis : str
    heading_mode : str — "tangent", "hold" or "blend"
    start_heading : float — [rad]
    reverse : ndarray, shape (S,) bool — leg ``i`` (ending at waypoint ``i``) is backwards
    knot_s : ndarray, shape (S + 1,) — arc length of the start and each waypoint [m]
    speed_cap : ndarray, shape (S + 1,) — speed cap at each point [m/s], ``inf`` where none
    dwell : ndarray, shape (S + 1,) — wait at each point [s]
    target_s, target_heading : ndarray, shape (H,) — blend targets [m], [rad] (unwrapped)
    labels : tuple of str — "the start", "waypoint[0]", ... for messages (the keys' indices)
    """

    path: Path
    chassis: str
    heading_mode: str
    start_heading: float
    reverse: np.ndarray
    knot_s: np.ndarray
    speed_cap: np.ndarray
    dwell: np.ndarray
    target_s: np.ndarray
    target_heading: np.ndarray
    labels: tuple[str, ...]

    @property
    def stops(self) -> np.ndarray:
        """Joint indices where the robot is at rest: start, cusps, dwells, end (sorted)."""
        at_rest = self.path.breaks | (self.dwell > 0.0)
        at_rest[0] = at_rest[-1] = True
        return np.flatnonzero(at_rest)

    def evaluate(self, s: np.ndarray) -> RouteSample:
        """Geometry and heading plan at arc lengths ``s``, shape (N,)."""
        s = np.atleast_1d(np.asarray(s, dtype=np.float64))
        geo = self.path.evaluate(s)
        leg, _ = self.path.locate(s)
        if self.heading_mode == "tangent":
            theta = wrap(geo.direction + np.pi * self.reverse[leg])
            return RouteSample(geo, leg, theta, geo.curvature.copy(), geo.curvature_rate.copy())
        if self.heading_mode == "hold" or len(self.target_s) < 2:
            z = np.zeros_like(s)
            return RouteSample(geo, leg, wrap(np.full_like(s, self.start_heading)), z, z.copy())
        ts, th = self.target_s, self.target_heading
        k = np.clip(np.searchsorted(ts, s, side="right") - 1, 0, len(ts) - 2)
        span = ts[k + 1] - ts[k]
        sig = np.clip((s - ts[k]) / span, 0.0, 1.0)
        delta = th[k + 1] - th[k]
        h = sig**3 * (10.0 - 15.0 * sig + 6.0 * sig**2)
        dh = 30.0 * sig**2 * (1.0 - sig) ** 2
        ddh = 60.0 * sig * (1.0 - sig) * (1.0 - 2.0 * sig)
        return RouteSample(geo, leg, wrap(th[k] + delta * h), delta * dh / span,
                           delta * ddh / span**2)


def validate_route(route: Route, *, chassis: str) -> None:
    """Check a route's values for a chassis.

    Raises
    ------
    PlanError
        For an unknown chassis, a heading plan the chassis cannot drive, a non-positive or
        non-finite limit, a speed cap of zero, a negative dwell or an empty route.
    """
    if chassis not in CHASSIS:
        raise PlanError(f"route: chassis must be one of {', '.join(map(repr, CHASSIS))}, got "
                        f"{chassis!r}{did_you_mean(chassis, CHASSIS)}")
    modes = ("tangent", "hold", "blend")
    if route.heading not in modes:
        raise PlanError(f"route: heading must be one of {', '.join(map(repr, modes))}, got "
                        f"{route.heading!r}{did_you_mean(route.heading, modes)}")
    if route.heading != "tangent" and chassis != "mecanum":
        raise PlanError(f"route: heading must be 'tangent' for a {chassis} chassis (only "
                        f"mecanum can strafe), got {route.heading!r}")
    limits = {"max_speed": route.max_speed, "max_accel": route.max_accel,
              "max_decel": route.decel, "max_lateral_accel": route.lateral_accel,
              "max_jerk": route.max_jerk, "max_turn_rate": route.max_turn_rate}
    for key, value in limits.items():
        if value is not None and not (isinstance(value, (int, float)) and math.isfinite(value)
                                      and value > 0.0):
            raise PlanError(f"route: {key} must be > 0, got {format_value(value)}")
    m = route.wheel_speed_margin
    if not (isinstance(m, (int, float)) and 0.0 < m <= 1.0):
        raise PlanError(f"route: wheel_speed_margin must be > 0 and <= 1, got {format_value(m)}")
    if not np.all(np.isfinite(np.asarray(route.start, dtype=float))):
        raise PlanError(f"route: start must be finite, got {format_value(route.start)}")
    if len(route.waypoints) == 0:
        raise PlanError("route: waypoint must list at least 1 point, got none")
    for i, wp in enumerate(route.waypoints):
        if not np.all(np.isfinite(np.asarray(wp.at, dtype=float))):
            raise PlanError(f"route: waypoint[{i}].at must be finite, got {format_value(wp.at)}")
        if wp.speed is not None and not wp.speed > 0.0:
            raise PlanError(f"route: waypoint[{i}].speed must be > 0, got "
                            f"{format_value(wp.speed)}; to stop there, give a dwell instead")
        if not wp.dwell >= 0.0:
            raise PlanError(f"route: waypoint[{i}].dwell must be >= 0, got {format_value(wp.dwell)}")
        if wp.heading is not None and route.heading == "hold":
            raise PlanError(f"route: waypoint[{i}].heading needs route.heading 'blend' or "
                            f"'tangent', got route.heading 'hold' (it would be ignored)")


def route_path(route: Route, *, chassis: str) -> RoutePath:
    """Smooth a route into a path with its heading plan.

    Parameters
    ----------
    route : Route
    chassis : str — "mecanum", "skid" or "differential"

    Returns
    -------
    RoutePath

    Raises
    ------
    PlanError
        See :func:`validate_route` and :func:`planners.paths.spline_path` (cusps the chassis
        cannot drive, points too close for their headings).
    """
    validate_route(route, chassis=chassis)
    wps = route.waypoints
    n = len(wps) + 1
    pts = np.array([route.start[:2], *[wp.at for wp in wps]], dtype=np.float64)
    reverse = np.array([wp.reverse for wp in wps], dtype=bool)
    toggle = np.zeros(n, dtype=bool)
    toggle[1:-1] = reverse[:-1] != reverse[1:]
    labels = ("the start", *[f"waypoint[{i}]" for i in range(n - 1)])
    directions = np.full(n, np.nan)
    tangent = route.heading == "tangent"
    if tangent:
        # the body faces travel, or away from it on reverse legs: direction of arrival
        directions[0] = route.start[2] + np.pi * reverse[0]
        for i, wp in enumerate(wps, start=1):
            if wp.heading is not None:
                directions[i] = wp.heading + np.pi * reverse[i - 1]
    if tangent:
        chord = pts[1] - pts[0]
        off = abs(float(wrap(np.arctan2(chord[1], chord[0]) - directions[0])))
        if off > np.radians(135.0):
            raise PlanError(
                f"route: waypoint[0] must lie ahead of the start heading, got it "
                f"{np.degrees(off):.0f} deg off; set reverse = true on waypoint[0] to back up "
                "to it, or turn the start heading")
    path = spline_path(pts, directions=directions, cusp=toggle if tangent else None,
                       corner=None if tangent else toggle, labels=labels)
    knot_s = path.knot_s.copy()
    caps = np.array([np.inf, *[np.inf if wp.speed is None else wp.speed for wp in wps]])
    dwell = np.array([0.0, *[wp.dwell for wp in wps]])
    ts, th = [0.0], [float(route.start[2])]
    if route.heading == "blend":
        for i, wp in enumerate(wps, start=1):
            if wp.heading is not None:
                ts.append(knot_s[i])
                th.append(th[-1] + float(wrap(wp.heading - th[-1])))
    return RoutePath(path, chassis, route.heading, float(route.start[2]), reverse, knot_s,
                     caps, dwell, np.array(ts), np.array(th), labels)
