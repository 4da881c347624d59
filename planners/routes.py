"""A route: the scripted list of points to drive, with its limits.

:class:`Route` and :class:`Waypoint` are plain SI data (the scenario loader in
:mod:`sim.scenario` fills them from the ``[route]`` table, checking every key against the
:class:`~planners.params.Param` declared in each field's metadata).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from planners.params import REQUIRED, Param


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
    waypoints: tuple[Waypoint, ...] = field(
        default=(), metadata=_p(dimension="tables", default=REQUIRED, doc="the points to drive")
    )

    @property
    def decel(self) -> float:
        """Braking limit [m/s^2] (``max_decel`` or ``max_accel``)."""
        return self.max_decel if self.max_decel is not None else self.max_accel

    @property
    def lateral_accel(self) -> float:
        """Lateral acceleration limit [m/s^2] (``max_lateral_accel`` or ``max_accel``)."""
        return self.max_lateral_accel if self.max_lateral_accel is not None else self.max_accel
