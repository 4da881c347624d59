"""Shared pieces of the estimators: dead reckoning from the context, fix readings, covariance.

Estimators receive the runner's context as duck-typed objects (``geometry`` with
``kind`` and ``forward_matrix``; ``sensors`` with ``encoders``, ``pods``, ``imu``,
``fixes``); nothing here imports :mod:`sim`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from planners.errors import ScenarioError
from planners.odometry import SOURCES, Odometry
from planners.odometry_geometry import assumed_forward_matrix
from planners.params import Param

SOURCE_PARAM = Param(
    dimension="choice", default="encoders", choices=SOURCES,
    doc="dead-reckoning source: drive encoders or pods, optionally with IMU heading",
)


MOTION_PARAMS: dict[str, Param] = {
    "distance_noise": Param(
        "dimensionless", 0.02, "position std after 1 m driven [m/sqrt(m)]", ge=0.0
    ),
    "turn_noise": Param(
        "dimensionless", 0.05, "heading std after 1 rad turned [rad/sqrt(rad)]", ge=0.0
    ),
    "drift_noise": Param(
        "dimensionless", 0.02, "heading std after 1 m driven [rad/sqrt(m)]", ge=0.0
    ),
    "lateral_noise": Param(
        "dimensionless", None,
        "sideways position std after 1 m driven [m/sqrt(m)] (default: distance_noise)", ge=0.0,
    ),
    "floor_xy": Param("length", 1e-4, "per-tick position noise floor", ge=0.0),
    "floor_heading": Param("angle", 1e-4, "per-tick heading noise floor", ge=0.0),
}


def motion_noise(context: dict[str, Any], p: dict[str, Any]) -> np.ndarray:
    """Coefficients (7,) of the odometry increment noise from the :data:`MOTION_PARAMS`.

    distance^2, lateral^2, turn^2, drift^2, gyro variance per tick (``N^2 T`` with the
    IMU's white rate noise density ``N``, IEEE Std 952-1997 angle random walk; -1 when the
    source's heading is not the gyro's), floor_xy^2, floor_heading^2. The variances they give
    are in :func:`planners.estimators.ekf_kernels.increment_variances`.
    """
    kd, kt, kh = (float(p[k]) for k in ("distance_noise", "turn_noise", "drift_noise"))
    kl = kd if p["lateral_noise"] is None else float(p["lateral_noise"])
    imu = getattr(context.get("sensors"), "imu", None)
    gyro_var = (
        float(getattr(imu, "rate_noise", 0.0)) ** 2 * float(context["dt"])
        if p["source"].endswith("+imu") else -1.0
    )
    return np.array([
        kd * kd, kl * kl, kt * kt, kh * kh, gyro_var,
        float(p["floor_xy"]) ** 2, float(p["floor_heading"]) ** 2,
    ])


def make_odometry(
    context: dict[str, Any], source: str, *, where: str, positions: bool = True
) -> Odometry:
    """Build the :class:`Odometry` of ``source`` from the runner's context.

    ``positions=False`` for a caller that reads only :attr:`Odometry.increment`.

    Raises
    ------
    ScenarioError
        When the sensors ``source`` needs are absent from ``context["sensors"]``.
    """
    sensors = context.get("sensors")
    geometry = context.get("geometry")
    base = source.split("+")[0]
    if base == "encoders":
        enc = getattr(sensors, "encoders", None)
        if enc is None or geometry is None:
            raise ScenarioError(
                f"{where}: sensors.encoders must be present for source {source!r}, got None"
            )
        odo_args: dict[str, Any] = dict(
            forward=assumed_forward_matrix(
                geometry, radius_scale=getattr(enc, "radius_scale", (1.0, 1.0)),
                track_scale=getattr(enc, "track_scale", 1.0),
            ),
            counts_per_rev=enc.counts_per_rev,
        )
    else:
        pods = tuple(getattr(sensors, "pods", ()) or ())
        if not pods:
            raise ScenarioError(
                f"{where}: sensors.pods must be present for source {source!r}, got none"
            )
        odo_args = dict(
            pod_at=np.array([p.at for p in pods], dtype=np.float64),
            pod_direction=np.array([p.direction for p in pods], dtype=np.float64),
            pod_radius=np.array([p.radius for p in pods], dtype=np.float64),
            pod_counts_per_rev=np.array([p.counts_per_rev for p in pods], dtype=np.float64),
            no_sideslip=geometry is not None and getattr(geometry, "kind", "mecanum") != "mecanum",
        )
    if source.endswith("+imu") and getattr(sensors, "imu", None) is None:
        raise ScenarioError(f"{where}: sensors.imu must be present for source {source!r}, got None")
    return Odometry(source=source, positions=positions, **odo_args)


def need_fixes(context: dict[str, Any], *, where: str) -> None:
    """Raise :class:`ScenarioError` when the robot has no fix sensor."""
    if getattr(context.get("sensors"), "fixes", None) is None:
        raise ScenarioError(f"{where}: sensors.fixes must be present, got None")


def need_imu(context: dict[str, Any], *, where: str) -> None:
    """Raise :class:`ScenarioError` when the robot has no IMU."""
    if getattr(context.get("sensors"), "imu", None) is None:
        raise ScenarioError(f"{where}: sensors.imu must be present, got None")


def fix_sigma(context: dict[str, Any], readings: Any) -> np.ndarray:
    """Fix standard deviations (3,) [m, m, rad]: from the readings, else the sensor config."""
    if readings is not None and readings.fix_sigma is not None:
        return np.asarray(readings.fix_sigma, dtype=np.float64)
    fx = context["sensors"].fixes
    return np.array([fx.sigma_xy, fx.sigma_xy, fx.sigma_heading], dtype=np.float64)


def valid_fixes(readings: Any, n: int) -> np.ndarray:
    """Bool mask (N,) of robots whose fix arrived this tick (all false without a fix sensor)."""
    if readings.fix is None or readings.fix_valid is None:
        return np.zeros(n, dtype=bool)
    return np.asarray(readings.fix_valid, dtype=bool) & np.all(np.isfinite(readings.fix), axis=1)


class FixFeed:
    """This tick's fixes as contiguous arrays for a compiled kernel, without allocating.

    ``sigma`` (3,) and ``variance`` (3,) follow the readings' ``fix_sigma`` (else the fix
    sensor's configuration) and are recomputed only when the readings carry a new array.
    """

    _UNSET = object()

    def __init__(self, context: dict[str, Any]) -> None:
        self._context = context
        self._seen: object = self._UNSET
        self.sigma = np.ones(3)
        self.variance = np.ones(3)
        self._none = (np.empty((0, 3)), np.empty(0, dtype=np.bool_), np.empty(0))

    def arrays(self, readings: Any, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """fix (N, 3), valid (N,), time (N,) — shape (0, ...) arrays when there is no fix."""
        if readings.fix is None or readings.fix_valid is None:
            return self._none
        if readings.fix_sigma is not self._seen:
            self.sigma = fix_sigma(self._context, readings)
            self.variance = self.sigma**2
            self._seen = readings.fix_sigma
        stamp = readings.fix_time
        return (
            np.ascontiguousarray(readings.fix, dtype=np.float64),
            np.ascontiguousarray(readings.fix_valid, dtype=np.bool_),
            self._none[2] if stamp is None else np.ascontiguousarray(stamp, dtype=np.float64).reshape(n),
        )


def as_start(pose0: np.ndarray, n: int) -> np.ndarray:
    """``pose0`` as a fresh float array (n, 3)."""
    return np.array(pose0, dtype=np.float64).reshape(n, 3)


CONTEXT_KEYS = ("geometry", "sensors", "field", "dt")


def split_params(
    where: str, declared: dict[str, Param], given: dict[str, Any]
) -> tuple[dict[str, Any], dict[str, Any]]:
    """Split constructor keywords into the runner's context and checked parameters.

    Parameters are checked against ``declared`` and filled with its defaults (the one place
    defaults live).

    Returns
    -------
    context : dict — geometry, sensors, field, dt (those given)
    params : dict — every declared key, given value or default

    Raises
    ------
    ScenarioError
        For an unknown key, a value out of bounds or a string not among the choices.
    """
    # resolve_params lives with the trackers; the estimators use the same checks
    from planners.trackers.base import resolve_params

    context = {k: given[k] for k in CONTEXT_KEYS if k in given}
    rest = {k: v for k, v in given.items() if k not in CONTEXT_KEYS}
    return context, resolve_params(where, declared, rest)
