"""The ``[sensors]`` tables of a scenario: encoders, pods, IMU, fixes and range sensors, in SI.

Each field's metadata holds the :class:`~planners.params.Param` that the loader
(:mod:`sim.schema`) checks the file against; defaults live here and nowhere else. A sensor
whose table is absent is absent from the robot (``None`` or an empty tuple).

Mounting positions and directions are in the body frame (x forward, y left, angles
counter-clockwise from body +x). Noise figures are standard deviations.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from planners.params import REQUIRED, Param


def _p(dimension: str, default: object = REQUIRED, doc: str = "", **kw) -> dict:
    return {"param": Param(dimension=dimension, default=default, doc=doc, **kw)}


@dataclass(frozen=True)
class Encoders:
    """Drive-wheel encoders: one per drive wheel, counting wheel spin (slip included).

    ``radius_scale`` and ``track_scale`` model a miscalibrated robot (the systematic errors
    of the UMBmark test): the physics and the counts follow ``[robot]``, while dead reckoning
    from these encoders assumes wheel radii ``robot.wheel_radius * radius_scale`` (left,
    right) and track ``robot.track * track_scale``. Wheel-speed control keeps ``[robot]``.
    """

    counts_per_rev: float = field(
        metadata=_p("dimensionless", gt=0.0, doc="counts per wheel revolution (after the gearbox)")
    )
    noise: float = field(
        default=0.0,
        metadata=_p("dimensionless", 0.0, "read jitter of the cumulative count [counts]", ge=0.0),
    )
    quantise: bool = field(
        default=True, metadata=_p("bool", True, "report whole counts (false: exact fractional counts)")
    )
    radius_scale: tuple[float, float] = field(
        default=(1.0, 1.0),
        metadata=_p(
            "dimensionless", (1.0, 1.0),
            "wheel radius the encoder odometry assumes, left and right, / robot.wheel_radius",
            shape=2, gt=0.5, lt=2.0,
        ),
    )
    track_scale: float = field(
        default=1.0,
        metadata=_p(
            "dimensionless", 1.0, "track the encoder odometry assumes / robot.track (skid, differential)",
            gt=0.5, lt=2.0,
        ),
    )


@dataclass(frozen=True)
class Pod:
    """One unpowered tracking wheel: rolls along ``direction`` at ``at``, never driven.

    It measures the floor displacement of its contact point along its direction, scaled by
    ``1 + scale_error``; on a lost-contact tick (probability ``skip``) it misses that tick's
    motion.
    """

    at: tuple[float, float] = field(metadata=_p("length", shape=2, doc="contact point x, y, body frame"))
    radius: float = field(metadata=_p("length", gt=0.0, doc="wheel radius"))
    counts_per_rev: float = field(metadata=_p("dimensionless", gt=0.0, doc="counts per pod revolution"))
    direction: float = field(
        default=0.0, metadata=_p("angle", 0.0, "rolling direction, body frame (0 = forward)")
    )
    scale_error: float = field(
        default=0.0,
        metadata=_p("dimensionless", 0.0, "measured / true distance - 1 (e.g. \"0.5 %\")", gt=-1.0, lt=1.0),
    )
    noise: float = field(
        default=0.0,
        metadata=_p("dimensionless", 0.0, "read jitter of the cumulative count [counts]", ge=0.0),
    )
    skip: float = field(
        default=0.0,
        metadata=_p("dimensionless", 0.0, "probability of a lost-contact tick", ge=0.0, lt=1.0),
    )
    quantise: bool = field(
        default=True, metadata=_p("bool", True, "report whole counts (false: exact fractional counts)")
    )


@dataclass(frozen=True)
class Imu:
    """Yaw-rate gyro (IEEE Std 952-1997 noise terms).

    Each sample is the mean yaw rate since the previous sample, times ``1 + scale_error``,
    plus the bias (which walks) and white noise of density ``rate_noise``.
    """

    rate: float | None = field(
        default=None, metadata=_p("frequency", None, "sample rate (default: every control tick)", gt=0.0)
    )
    rate_noise: float = field(
        default=0.0,
        metadata=_p("rate_noise_density", 0.0, "white rate noise density N (angle random walk)", ge=0.0),
    )
    bias_walk: float = field(
        default=0.0,
        metadata=_p("rate_random_walk", 0.0, "bias random walk K (rate random walk)", ge=0.0),
    )
    bias: float = field(default=0.0, metadata=_p("angular_speed", 0.0, "bias at the start"))
    scale_error: float = field(
        default=0.0,
        metadata=_p("dimensionless", 0.0, "measured / true rate - 1", gt=-1.0, lt=1.0),
    )


@dataclass(frozen=True)
class Fixes:
    """Absolute pose fixes from field landmarks (a camera reading markers).

    A fix is due at ``rate``; it describes the pose of ``latency`` seconds ago (rounded to
    a whole control tick) and exists when a landmark was within ``range``, inside the
    ``fov`` centred on ``direction`` and not hidden by a wall, and the fix was not lost
    (probability ``dropout``).
    """

    rate: float = field(default=10.0, metadata=_p("frequency", 10.0, "fix rate", gt=0.0))
    sigma_xy: float = field(default=0.02, metadata=_p("length", 0.02, "position noise per axis", ge=0.0))
    sigma_heading: float = field(
        default=math.radians(1.0), metadata=_p("angle", math.radians(1.0), "heading noise", ge=0.0)
    )
    latency: float = field(default=0.0, metadata=_p("time", 0.0, "age of a fix when it arrives", ge=0.0))
    range: float | None = field(
        default=None, metadata=_p("length", None, "farthest usable landmark (default: any)", gt=0.0)
    )
    fov: float = field(
        default=2.0 * math.pi,
        metadata=_p("angle", 2.0 * math.pi, "full field of view", gt=0.0, le=2.0 * math.pi),
    )
    direction: float = field(default=0.0, metadata=_p("angle", 0.0, "camera axis, body frame"))
    dropout: float = field(
        default=0.0, metadata=_p("dimensionless", 0.0, "probability a due fix is lost", ge=0.0, le=1.0)
    )


@dataclass(frozen=True)
class RangeSensor:
    """A distance sensor: range to the nearest wall or obstacle along a ray."""

    at: tuple[float, float] = field(metadata=_p("length", shape=2, doc="mounting point x, y, body frame"))
    max_range: float = field(metadata=_p("length", gt=0.0, doc="farther than this reads inf"))
    direction: float = field(default=0.0, metadata=_p("angle", 0.0, "ray direction, body frame"))
    sigma: float = field(default=0.0, metadata=_p("length", 0.0, "range noise", ge=0.0))
    rate: float | None = field(
        default=None, metadata=_p("frequency", None, "sample rate (default: every control tick)", gt=0.0)
    )


@dataclass(frozen=True)
class SensorSuite:
    """Every sensor on the robot: the ``[sensors]`` table."""

    encoders: Encoders | None = field(default=None, metadata=_p("table", None, "drive-wheel encoders"))
    pods: tuple[Pod, ...] = field(default=(), metadata=_p("tables", (), "tracking wheels"))
    imu: Imu | None = field(default=None, metadata=_p("table", None, "yaw-rate gyro"))
    fixes: Fixes | None = field(default=None, metadata=_p("table", None, "absolute pose fixes"))
    range: tuple[RangeSensor, ...] = field(default=(), metadata=_p("tables", (), "distance sensors"))
