"""Log replay: a robot's logged sensor stream through any estimator, compared with the truth
or the reference when the log has them.

The robot's geometry and sensor noise figures come from a scenario when one is given (its
``[robot]`` and ``[sensors.*]`` tables), otherwise from the log's metadata (``chassis``,
``wheel_radius``, ``track``, ``wheelbase``; optional ``gyro_rate_noise``, ``fix_sigma_xy``,
``fix_sigma_heading``). A log written per side (``left``/``right``) replays on a
differential geometry of the same track, which is the kinematics of a skid chassis too.
"""

from __future__ import annotations

import dataclasses
import math
import re
from dataclasses import dataclass

import numpy as np

from planners.errors import LogError, ScenarioError
from planners.estimators import ESTIMATORS
from planners.kinematics import ChassisGeometry
from planners.log_readings import LOG_COUNTS_PER_REV, log_readings
from planners.robot_log import RobotLog
from planners.se2 import wrap
from sim.config_sensors import Encoders, Fixes, Imu, SensorSuite
from sim.field import Field
from sim.scenario import Scenario


@dataclass
class Replay:
    """Result of a replay.

    Attributes
    ----------
    t : ndarray, shape (T,) — [s]
    estimate : ndarray, shape (T, 3) — [m, m, rad], field frame
    truth, reference : ndarray, shape (T, 3), or None — from the log
    kind : str — the estimator
    """

    t: np.ndarray
    estimate: np.ndarray
    truth: np.ndarray | None
    reference: np.ndarray | None
    kind: str

    def compare(self) -> dict[str, dict[str, float]]:
        """Position RMS, final position and final heading error against truth and reference."""
        out = {}
        for name, other in (("truth", self.truth), ("reference", self.reference)):
            if other is None:
                continue
            ok = np.all(np.isfinite(other), axis=1)
            if not ok.any():
                continue
            d = np.hypot(*(self.estimate[ok, :2] - other[ok, :2]).T)
            last = int(np.flatnonzero(ok)[-1])
            out[name] = {
                "position_rms": float(np.sqrt(np.mean(d**2))),
                "position_max": float(d.max()),
                "final_position": float(d[-1]),
                "final_heading_deg": float(abs(math.degrees(wrap(self.estimate[last, 2] - other[last, 2])))),
            }
        return out


def _meta_float(log: RobotLog, key: str, default: float | None = None) -> float:
    if key not in log.meta:
        if default is not None:
            return default
        raise LogError(f"{log.source}: replay needs the metadata line '# {key} = ...' or --scenario")
    try:
        return float(log.meta[key])
    except ValueError:
        raise LogError(f"{log.source}: metadata {key} must be a number, got {log.meta[key]!r}") from None


def replay_geometry(log: RobotLog, scenario: Scenario | None) -> ChassisGeometry:
    """The robot geometry the log's wheel columns are read with."""
    if scenario is not None:
        r = scenario.robot
        radius, track, wheelbase, chassis = r.wheel_radius, r.track, r.wheelbase, r.chassis
    else:
        chassis = log.meta.get("chassis", "differential" if log.wheels == ("left", "right") else "mecanum")
        radius = _meta_float(log, "wheel_radius")
        track = _meta_float(log, "track")
        wheelbase = _meta_float(log, "wheelbase", 0.0)
    if log.wheels == ("left", "right"):
        return ChassisGeometry(kind="differential", wheel_radius=radius, track=track, wheelbase=0.0, wheels=2)
    if chassis != "mecanum":
        raise LogError(f"{log.source}: wheel columns fl, fr, rl, rr need a mecanum chassis, got {chassis!r}")
    return ChassisGeometry(kind="mecanum", wheel_radius=radius, track=track, wheelbase=wheelbase, wheels=4)


def replay_sensors(log: RobotLog, scenario: Scenario | None) -> SensorSuite:
    """The sensor suite the estimator is told about: what the log holds, noise figures from the
    scenario (or metadata, or the defaults)."""
    base = scenario.sensors if scenario is not None else SensorSuite()
    encoders = None
    if log.wheel_angle() is not None:  # positions, or speeds integrated to positions
        encoders = Encoders(counts_per_rev=LOG_COUNTS_PER_REV, quantise=False)
    imu = None
    if log.has("yaw_rate"):
        imu = base.imu or Imu(rate_noise=_meta_float(log, "gyro_rate_noise", 0.0))
    fixes = None
    if log.pose("fix") is not None:
        fixes = base.fixes or Fixes(
            sigma_xy=_meta_float(log, "fix_sigma_xy", 0.02),
            sigma_heading=_meta_float(log, "fix_sigma_heading", math.radians(1.0)),
        )
    pods: tuple = ()
    if any(c.startswith("pod_") for c in log.columns):
        if not base.pods:
            raise LogError(f"{log.source}: pod columns need --scenario with the pods' [[sensors.pods]] geometry")
        # the log holds pods in metres: one "count" per metre of travel
        pods = tuple(dataclasses.replace(p, counts_per_rev=2.0 * math.pi * p.radius, quantise=False) for p in base.pods)
    return SensorSuite(encoders=encoders, pods=pods, imu=imu, fixes=fixes)


#: sensor tables an estimator may ask for -> the log columns that provide them
_SENSOR_COLUMNS = {
    "sensors.encoders": "wheel columns 'position_<w>' or 'velocity_<w>' for every wheel "
                        "(w = left, right per side, or fl, fr, rl, rr)",
    "sensors.imu": "the column 'yaw_rate [rad/s]' (or [deg/s])",
    "sensors.fixes": "the columns 'fix_x [m]', 'fix_y [m]', 'fix_heading [rad]'",
    "sensors.pods": "columns 'pod_0', 'pod_1', ... and --scenario with their [[sensors.pods]]",
}


def _as_log_error(log: RobotLog, kind: str, exc: ScenarioError) -> LogError:
    """An estimator's complaint about a missing sensor, reworded for the log it was given."""
    text = str(exc)
    needs = [cols for key, cols in _SENSOR_COLUMNS.items() if key in text]
    source = re.search(r"for source '([^']+)'", text)
    how = f" with source {source.group(1)!r}" if source else ""
    have = ", ".join(["t", *log.columns])
    if needs:
        return LogError(
            f"{log.source}: line {log.header_row or 1} (header): estimator {kind!r}{how} needs "
            f"{' and '.join(needs)}; the log has {have} (log format: planners/robot_log.py)"
        )
    return LogError(f"{log.source}: estimator {kind!r} cannot replay this log: {text}")


def start_pose(log: RobotLog, given: tuple[float, float, float] | None) -> np.ndarray:
    """Start pose (1, 3): given, else the first reference, truth or fix row of the log, else 0."""
    if given is not None:
        return np.array([given], dtype=np.float64)
    for prefix in ("ref", "true", "fix"):
        pose = log.pose(prefix)
        if pose is not None and np.all(np.isfinite(pose[0])):
            return pose[:1].copy()
    return np.zeros((1, 3))


def replay(
    log: RobotLog,
    kind: str,
    *,
    scenario: Scenario | None = None,
    field: Field | None = None,
    params: dict | None = None,
    start: tuple[float, float, float] | None = None,
    seed: int = 0,
) -> Replay:
    """Run the log's readings through estimator ``kind``.

    Parameters
    ----------
    log : RobotLog
    kind : str — a registered estimator name
    scenario : Scenario, optional — robot geometry, sensor figures, field, estimator parameters
    field : Field, optional — overrides the scenario's field
    params : dict, optional — estimator parameters (default: the scenario's when its
        estimator is ``kind``, else the estimator's defaults)
    start : (x, y, heading), optional — start pose [m, m, rad]
    seed : int — for estimators that draw (particle)

    Raises
    ------
    LogError, ScenarioError, RegistryError — for a log or estimator that cannot be replayed
    """
    cls = ESTIMATORS.get(kind)
    if params is None:
        params = dict(scenario.estimator.params) if scenario is not None and scenario.estimator.kind == kind else {}
    if field is None and scenario is not None:
        field = scenario.field
    dt = float(np.median(np.diff(log.t)))
    try:
        est = cls(geometry=replay_geometry(log, scenario), sensors=replay_sensors(log, scenario), field=field,
                  dt=dt, **params)
    except LogError:
        raise
    except ScenarioError as exc:
        raise _as_log_error(log, kind, exc) from None
    if getattr(cls, "NEEDS_TRUTH", False) and log.pose("true") is None:
        raise LogError(f"{log.source}: estimator {kind!r} needs true_x, true_y, true_heading columns")
    pose0 = start_pose(log, start)
    est.reset(pose0, 1, rngs=[np.random.default_rng(np.random.SeedSequence(seed))])
    out = np.empty((len(log.t), 3))
    for i, readings in enumerate(log_readings(log)):
        out[i] = est.update(readings.t, readings)[0]
    return Replay(t=log.t.copy(), estimate=out, truth=log.pose("true"), reference=log.pose("ref"), kind=kind)
