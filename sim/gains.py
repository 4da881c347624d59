"""The gains of one scenario from its own constants, and a TOML fragment to paste back.

``skidpad gains`` (:mod:`sim.commands.gains`) prints what :func:`scenario_gains` works out:

* wheel feedforward kS, kV, kA: the scenario's ``[control]`` values where given, else the
  motor datasheet through :func:`planners.control.feedforward_from_motor`, as
  :class:`sim.runner.Simulation` derives them;
* wheel-speed kP (discrete LQR with Bryson's weights) and kI (SIMC): resolved by the same
  :class:`~planners.control.WheelController` the run uses, so they are the run's gains;
* ``unicycle`` and ``holonomic`` tracker gains for a natural frequency and damping
  (:mod:`planners.gains`), at a design speed (default: ``route.max_speed``);
* the steady-state gain and heading sigma of the ``kalman`` estimator from the IMU's noise
  figures and the heading measurement's noise (:mod:`planners.gains_heading`).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from planners.control import Feedforward, WheelController, feedforward_from_motor
from planners.errors import ScenarioError, SkidpadError, format_value
from planners.estimators import ESTIMATORS
from planners.gains import (
    bryson,
    holonomic_gains,
    unicycle_gains,
    velocity_loop_time_constant,
    wheel_loop_weights,
)
from planners.gains_heading import HeadingGain, gyro_tick_sigma, heading_kalman
from planners.trackers import TRACKERS
from sim.planning import geometry
from sim.scenario import Scenario
from sim.toml_files import comment_block
from sim.units import to_si

#: the wheel-loop constants written to ``[control]``
CONTROL_KEYS = ("kS", "kV", "kA", "kP", "kI")


@dataclass(frozen=True)
class WheelGains:
    """Resolved wheel-loop constants (one value: every wheel of a robot is the same)."""

    values: dict[str, float]  # kS [V], kV [V s/rad], kA [V s^2/rad], kP [V s/rad], kI [V/rad]
    source: dict[str, str]  # "[control]", "motor datasheet", "discrete LQR", "SIMC"
    max_error: float  # Bryson bound on the speed error [rad/s]
    max_effort: float  # Bryson bound on the correction [V]
    tau_plant: float  # kA / kV [s]
    tau_closed: float  # closed-loop time constant under kP [s]


@dataclass(frozen=True)
class HeadingDesign:
    """The heading filter's steady state for one measurement kind."""

    measure: str  # "fixes" or "odometry"
    sigma: float  # heading measurement noise [rad]
    every_tick: HeadingGain  # as the estimator's steady mode computes it
    at_rate: HeadingGain | None  # between measurements that come every ``every`` ticks
    every: int


@dataclass(frozen=True)
class ScenarioGains:
    """Everything ``skidpad gains`` prints and writes for one scenario."""

    scenario: Scenario
    dt: float
    wheel: WheelGains
    bandwidth: float  # [rad/s]
    damping: float
    design_speed: float  # [m/s]
    unicycle: dict[str, float]
    holonomic: dict[str, float]
    tracker_kind: str  # the tracker the fragment's [tracker] is for
    gyro_sigma: float | None  # per-sample gyro rate noise [rad/s]
    heading: tuple[HeadingDesign, ...]
    fragment: dict
    notes: list[str] = field(default_factory=list)


def parse_bandwidth(text: str) -> float:
    """``"2 Hz"`` -> 2 pi 2 rad/s; ``"12"``, ``"12 1/s"``, ``"12 rad/s"`` -> 12 rad/s.

    Raises
    ------
    ScenarioError
        For text that is not a positive frequency.
    """
    t = str(text).strip()
    try:
        if t.lower().endswith("hz"):
            value = 2.0 * math.pi * to_si(t[:-2].strip() + " Hz", "frequency", where="--bandwidth")
        else:
            t = t[:-3].strip() if t.endswith("1/s") else t
            value = to_si(t, "angular_speed", where="--bandwidth")
    except SkidpadError:
        value = float("nan")
    if not value > 0.0:
        raise ScenarioError(
            f"--bandwidth must be a positive number in 1/s (rad/s) or a frequency like '0.5 Hz', got {text!r}"
        )
    return value


def motor_feedforward(sc: Scenario) -> Feedforward:
    """kS, kV, kA of each wheel from the scenario's motor, as the run derives them."""
    robot, m = sc.robot, sc.robot.motor
    return feedforward_from_motor(
        free_speed=m.free_speed, stall_torque=m.stall_torque, stall_current=m.stall_current,
        free_current=m.free_current, voltage=m.nominal_voltage or robot.battery.voltage,
        gear_ratio=robot.gear_ratio, gear_efficiency=robot.gear_efficiency,
        mass_share=robot.mass / robot.wheel_count, wheel_radius=robot.wheel_radius,
        wheel_inertia=robot.wheel_inertia, rotor_inertia=m.rotor_inertia, wheels=robot.wheel_count,
    )


def read_constants(path: str | os.PathLike) -> tuple[dict[str, float], list[str]]:
    """kS [V], kV [V s/rad], kA [V s^2/rad] from the JSON object that
    ``skidpad identify --kind feedforward --json`` prints, and notes (its ``ka_separable: false``).

    Raises
    ------
    ScenarioError
        For an unreadable file, text that is not one JSON object, or a constant missing, not a
        number or out of range (kS >= 0, kV > 0, kA > 0).
    """
    where = str(path)
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise ScenarioError(f"{where}: cannot read constants ({exc.strerror or exc})") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ScenarioError(f"{where}: must be the JSON object `skidpad identify --kind feedforward --json` "
                            f"prints; not JSON ({exc})") from None
    if not isinstance(doc, dict):
        raise ScenarioError(f"{where}: must be a JSON object with keys kS, kV, kA, got {format_value(doc)}")
    out = {}
    for key, low, unit in (("kS", ">= 0", "V"), ("kV", "> 0", "V s/rad"), ("kA", "> 0", "V s^2/rad")):
        v = doc.get(key)
        ok = isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) and (
            v >= 0.0 if key == "kS" else v > 0.0)
        if not ok:
            got = "missing" if key not in doc else f"got {format_value(v)}"
            raise ScenarioError(f"{where}: {key} must be a number {low} [{unit}], {got}")
        out[key] = float(v)
    notes = []
    if doc.get("ka_separable") is False:
        notes.append(f"{where} says kA was not separable (too little acceleration in the log): kA and "
                     "the kP designed from it are uncertain; fit again with a step test")
    return out, notes


def wheel_gains(sc: Scenario, dt: float, *, given_as: str = "[control]") -> WheelGains:
    """The wheel loop's constants as :class:`WheelController` resolves them for this scenario;
    ``given_as`` names where the ``[control]`` kS, kV, kA came from (for the printout).

    Raises
    ------
    ScenarioError
        When the wheels do not all share one value (``[control]`` holds one number a key).
    """
    robot = sc.robot
    voltage = robot.battery.voltage
    ctl = WheelController(
        wheels=robot.wheel_count, dt=dt, voltage=voltage, motor=motor_feedforward(sc), **sc.control
    )
    values = {}
    for key in CONTROL_KEYS:
        v = np.asarray(ctl.gains[key], dtype=np.float64).reshape(-1)
        if np.ptp(v) > 1e-12 * max(1.0, float(np.max(np.abs(v)))):
            raise ScenarioError(f"{sc.source}: control.{key} differs between wheels, got {v.tolist()}")
        values[key] = float(v[0])
    given = {k: sc.control.get(k) is not None for k in CONTROL_KEYS}
    source = {k: given_as if given[k] else "motor datasheet" for k in ("kS", "kV", "kA")}
    source["kP"] = "[control]" if given["kP"] else "discrete LQR"
    source["kI"] = "[control]" if given["kI"] else "SIMC"
    err, eff = wheel_loop_weights(
        values["kS"], values["kV"], voltage, max_error=sc.control.get("max_error"),
        max_effort=sc.control.get("max_effort"),
    )
    tau_c = velocity_loop_time_constant(values["kP"], values["kV"], values["kA"], dt)
    return WheelGains(
        values=values, source=source, max_error=float(err[0]), max_effort=float(eff[0]),
        tau_plant=values["kA"] / values["kV"], tau_closed=float(tau_c[0]),
    )


def bryson_weights(w: WheelGains) -> tuple[float, float]:
    """Bryson's Q and R of the wheel-speed LQR: ``1 / max_error^2``, ``1 / max_effort^2``."""
    q, r = bryson(w.max_error, w.max_effort)
    return float(q[0, 0]), float(r[0, 0])


def _sig(x: float) -> float:
    return float(f"{x:.6g}")


def _heading(sc: Scenario, dt: float, notes: list[str]) -> tuple[float | None, tuple, dict | None]:
    imu, fixes = sc.sensors.imu, sc.sensors.fixes
    if imu is None:
        notes.append("no [sensors.imu]: no heading filter to design")
        return None, (), None
    kalman = ESTIMATORS.get("kalman")
    own = sc.estimator.kind == "kalman"
    params = dict(sc.estimator.params) if own else {k: p.default for k, p in kalman.PARAMS.items()}
    if not own:
        params["measure"] = "fixes" if fixes is not None else "odometry"
    sample = max(dt, 1.0 / imu.rate) if imu.rate else dt
    gyro = gyro_tick_sigma(imu.rate_noise, sample)
    if gyro <= 0.0:
        notes.append("sensors.imu.rate_noise is 0: the heading filter has no gyro noise to weigh")
        return None, (), None
    measure = params["measure"]
    kinds = [k for k in ("fixes", "odometry") if measure in (k, "both")]
    if imu.bias_walk == 0.0:
        notes.append("sensors.imu.bias_walk is 0: the filter keeps learning the bias (its steady gain is 0)")
    designs = []
    for kind in kinds:
        if kind == "fixes":
            if fixes is None:
                continue
            sigma, every = fixes.sigma_heading, max(1, round(1.0 / (fixes.rate * dt)))
        else:
            sigma, every = params["odometry_sigma"], 1
        common = {"dt": dt, "gyro_sigma": gyro, "bias_walk": imu.bias_walk, "sigma": sigma}
        designs.append(HeadingDesign(
            measure=kind, sigma=sigma, every_tick=heading_kalman(**common),
            at_rate=heading_kalman(**common, every=every) if every > 1 else None, every=every,
        ))
    raw = dict(sc.document.get("estimator", {})) if own else {"kind": "kalman", "measure": measure}
    raw.update(gyro_sigma=_sig(gyro), bias_walk=_sig(imu.bias_walk))
    try:  # the fragment's estimator must build on this robot
        kalman(geometry=geometry(sc.robot), sensors=sc.sensors, field=sc.field, dt=dt,
               **{**params, "gyro_sigma": raw["gyro_sigma"], "bias_walk": raw["bias_walk"]})
    except ScenarioError as exc:
        notes.append(f"no [estimator] written: {exc}")
        raw = None
    return gyro, tuple(designs), raw


def _tracker_kind(sc: Scenario) -> str:
    if sc.tracker.kind in ("unicycle", "holonomic") and sc.robot.chassis in TRACKERS.get(sc.tracker.kind).CHASSIS:
        return sc.tracker.kind
    holonomic_ok = sc.robot.chassis in TRACKERS.get("holonomic").CHASSIS
    return "holonomic" if holonomic_ok and sc.route.heading != "tangent" else "unicycle"


def scenario_gains(
    sc: Scenario,
    *,
    bandwidth: float | None = None,
    damping: float | None = None,
    speed: float | None = None,
    given_as: str = "[control]",
) -> ScenarioGains:
    """Work out the gains of ``sc`` and the ``[control]``/``[tracker]``/``[estimator]`` fragment.

    Parameters
    ----------
    sc : Scenario
    bandwidth : float, optional — tracker natural frequency [rad/s] (default: the holonomic
        tracker's default bandwidth)
    damping : float, optional — unicycle damping in (0, 1) (default: the tracker's default)
    speed : float, optional — unicycle design speed [m/s] (default: ``route.max_speed``)
    given_as : str — where the scenario's ``[control]`` kS, kV, kA came from (printout label)

    Raises
    ------
    ScenarioError
        For a bandwidth, damping or speed out of range (one line naming the option).
    """
    uni_cls, holo_cls = TRACKERS.get("unicycle"), TRACKERS.get("holonomic")
    bandwidth = holo_cls.PARAMS["bandwidth"].default if bandwidth is None else float(bandwidth)
    damping = uni_cls.PARAMS["zeta"].default if damping is None else float(damping)
    speed = sc.route.max_speed if speed is None else float(speed)
    if not bandwidth > 0.0:
        raise ScenarioError(f"--bandwidth must be > 0 rad/s, got {bandwidth!r}")
    if not 0.0 < damping < 1.0:
        raise ScenarioError(f"--damping must be in (0, 1) (the unicycle tracker's zeta), got {damping!r}")
    if not speed > 0.0:
        raise ScenarioError(f"--speed must be > 0 m/s, got {speed!r}")
    dt = 1.0 / sc.run.rate
    notes: list[str] = []
    wheel = wheel_gains(sc, dt, given_as=given_as)
    uni = unicycle_gains(bandwidth=bandwidth, damping=damping, speed=speed)
    holo = holonomic_gains(bandwidth=bandwidth)
    kind = _tracker_kind(sc)
    tracker = dict(sc.document.get("tracker", {})) if kind == sc.tracker.kind else {"kind": kind}
    designed = uni if kind == "unicycle" else holo
    tracker.update({k: _sig(v) for k, v in designed.items()})
    own = dict(sc.tracker.params) if kind == sc.tracker.kind else {}
    TRACKERS.get(kind)(chassis=sc.robot.chassis, **{**own, **designed})  # checks the keys
    if bandwidth > 0.2 / wheel.tau_closed:
        notes.append(
            f"the tracker bandwidth {bandwidth:.3g} rad/s is above a fifth of the wheel loop's "
            f"{1.0 / wheel.tau_closed:.3g} rad/s: the loops may interact (rule of thumb for cascaded loops)"
        )
    control = dict(sc.document.get("control", {}))
    control.update({k: _sig(v) for k, v in wheel.values.items()})
    gyro, heading, estimator = _heading(sc, dt, notes)
    fragment = {"control": control, "tracker": tracker}
    if estimator is not None:
        fragment["estimator"] = estimator
    return ScenarioGains(
        scenario=sc, dt=dt, wheel=wheel, bandwidth=bandwidth, damping=damping, design_speed=speed,
        unicycle=uni, holonomic=holo, tracker_kind=kind, gyro_sigma=gyro, heading=heading,
        fragment=fragment, notes=notes,
    )


def fragment_text(g: ScenarioGains, safety: str) -> str:
    """The fragment as TOML, headed by comments carrying ``safety`` and what to paste where."""
    import tomli_w

    other = "holonomic" if g.tracker_kind == "unicycle" else "unicycle"
    alt = g.holonomic if other == "holonomic" else g.unicycle
    lines = [
        f"skidpad gains for {g.scenario.title} ({g.scenario.source}), values in SI.",
        safety,
        "[control] kS, kV, kA: " + ", ".join(sorted({g.wheel.source[k] for k in ("kS", "kV", "kA")})) + ".",
        "Paste these tables over the scenario's own [control], [tracker]"
        + (" and [estimator]" if "estimator" in g.fragment else "") + " tables.",
        f"[tracker]: the {g.tracker_kind} tracker at {g.bandwidth:.4g} rad/s"
        + (f", damping {g.damping:g}, design speed {g.design_speed:g} m/s." if g.tracker_kind == "unicycle" else "."),
    ]
    if g.scenario.robot.chassis in TRACKERS.get(other).CHASSIS:
        lines.append(f"For the {other} tracker instead: kind = \"{other}\", "
                     + ", ".join(f"{k} = {_sig(v)}" for k, v in alt.items()) + ".")
    if "estimator" in g.fragment:
        lines.append("[estimator]: the heading Kalman filter with the IMU's noise figures; "
                     "leave it out to keep your estimator.")
    return comment_block(lines) + "\n" + tomli_w.dumps(g.fragment)
