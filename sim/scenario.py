"""Load and validate scenario and field files into frozen dataclasses.

A scenario file (TOML) names a field file (relative to itself) and holds the tables
``[robot]``, ``[sensors]``, ``[route]``, ``[tracker]``, ``[estimator]``, ``[control]`` and
``[run]`` (DESIGN.md §5). Every key is checked for type, unit dimension and range; unknown
keys are rejected with a suggestion; cross-checks (waypoints inside the field, start
footprint clear, heading modes the chassis can drive) run after the tables are read.

``--set key=value`` overrides apply to the raw document before validation, so an override is
checked exactly like the file.
"""

from __future__ import annotations

import copy
import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from shapely import affinity
from shapely.geometry import Point, Polygon

from planners.errors import ScenarioError, did_you_mean, format_value
from planners.params import Param
from planners.routes import Route
from sim.config_robot import Robot
from sim.config_run import Plugin, Run, Vary
from sim.config_sensors import SensorSuite
from sim.field import Field
from sim.field_file import load_field
from sim.toml_files import MAX_FILE_BYTES, read_toml  # noqa: F401  (re-exported)
from sim.schema import read_params, read_table, read_value, reject_unknown
from sim.units import to_si

SCENARIO_KEYS = ("title", "field", "robot", "sensors", "route", "tracker", "estimator", "control", "run")

DEFAULT_SCENARIO = "workshop-loop.toml"


def bundled_dir(kind: str) -> Path:
    """Folder of the bundled ``"scenarios"`` or ``"fields"``, installed or in a checkout.

    An installed skidpad carries them as the data packages ``sim.bundled.*`` (see
    pyproject.toml), i.e. in ``sim/bundled/<kind>``; a source checkout (or an editable
    install) has them at the repository root.
    """
    here = Path(__file__).resolve().parent
    installed = here / "bundled" / kind
    return installed if installed.is_dir() else here.parent / kind


@dataclass(frozen=True, eq=False)
class Scenario:
    """A validated scenario, every value in SI.

    Attributes
    ----------
    title : str
    source : str — the scenario file
    field : Field
    robot : Robot
    sensors : SensorSuite
    route : Route
    tracker, estimator : Plugin — registered kind and its parameters
    control : dict — wheel-control constants (``None`` = derive from the motor model)
    run : Run
    document : dict — the raw TOML document after overrides (written beside results)
    notes : tuple of str — things the loader decided and the user should know
    """

    title: str
    source: str
    field: Field
    robot: Robot
    sensors: SensorSuite
    route: Route
    tracker: Plugin
    estimator: Plugin
    control: dict[str, Any]
    run: Run
    document: dict = field(repr=False, default_factory=dict)
    notes: tuple[str, ...] = ()


def bundled_scenarios() -> list[Path]:
    """Scenario files shipped with skidpad."""
    return sorted(bundled_dir("scenarios").glob("*.toml"))


def default_scenario_path() -> Path:
    """The bundled scenario ``skidpad run`` uses without an argument."""
    return bundled_dir("scenarios") / DEFAULT_SCENARIO


# ------------------------------------------------------------------------ scenario files


def parse_override(text: str) -> tuple[str, Any]:
    """Split ``key=value``; the value is read as a TOML value, else taken as a string."""
    if "=" not in text:
        raise ScenarioError(f"--set: {text!r} must look like key=value")
    key, value = text.split("=", 1)
    key = key.strip()
    if not key:
        raise ScenarioError(f"--set: {text!r} must look like key=value")
    try:
        parsed = tomllib.loads(f"v = {value.strip()}")["v"]
    except tomllib.TOMLDecodeError:
        parsed = value.strip()
    return key, parsed


def apply_overrides(doc: dict, overrides: list[tuple[str, Any]]) -> dict:
    """A copy of ``doc`` with dotted keys set (``route.waypoint.2.speed`` indexes arrays)."""
    doc = copy.deepcopy(doc)
    for key, value in overrides:
        node: Any = doc
        parts = key.split(".")
        for depth, part in enumerate(parts[:-1]):
            if isinstance(node, list):
                if not part.isdigit() or int(part) >= len(node):
                    raise ScenarioError(f"--set: {key}: index {part} must be below {len(node)}")
                node = node[int(part)]
            else:
                nxt = node.setdefault(part, {})
                if not isinstance(nxt, (dict, list)):
                    prefix = ".".join(parts[: depth + 1])
                    raise ScenarioError(f"--set: {key}: {prefix} is a value, not a table")
                node = nxt
        last = parts[-1]
        if isinstance(node, list):
            if not last.isdigit() or int(last) >= len(node):
                raise ScenarioError(f"--set: {key}: index {last} must be below {len(node)}")
            node[int(last)] = value
        else:
            node[last] = value
    return doc


def load_scenario(path: str | os.PathLike, overrides: list[str] | tuple[str, ...] = ()) -> Scenario:
    """Load, override and validate a scenario file.

    Parameters
    ----------
    path : path of the scenario file
    overrides : ``"key=value"`` strings, as given to ``--set``

    Raises
    ------
    ScenarioError
        With one line naming the file, the key, the value and what is allowed.
    """
    doc = read_toml(path)
    pairs = [parse_override(o) for o in overrides]
    doc = apply_overrides(doc, pairs)
    where = str(path) + (" (with --set)" if pairs else "")
    return scenario_from_document(doc, where=where, base=Path(path).resolve().parent, source=str(path))


def scenario_from_document(doc: dict, *, where: str, base: Path, source: str = "") -> Scenario:
    """Validate a raw scenario document (see :func:`load_scenario`)."""
    reject_unknown(doc, SCENARIO_KEYS, where, "")
    title = doc.get("title", Path(source).stem if source else "untitled")
    if not isinstance(title, str):
        raise ScenarioError(f"{where}: title must be a string, got {format_value(title)}")
    if "field" not in doc or not isinstance(doc["field"], str):
        raise ScenarioError(
            f"{where}: field must be the path of a field file (relative to the scenario), "
            f"got {format_value(doc.get('field'))}"
        )
    field_path = (base / doc["field"]).resolve()
    if not field_path.is_file():
        raise ScenarioError(f"{where}: field: file not found: {doc['field']!r} (looked in {base})")
    fld = load_field(field_path)
    for key in ("robot", "route"):
        if key not in doc:
            raise ScenarioError(f"{where}: {key}: missing table [{key}]")
    robot = read_table(Robot, doc["robot"], where, "robot")
    _check_robot(robot, where)
    sensors = read_table(SensorSuite, doc.get("sensors", {}), where, "sensors")
    route = read_table(Route, doc["route"], where, "route")
    run_table = dict(doc.get("run", {})) if isinstance(doc.get("run", {}), dict) else doc["run"]
    vary_raw = run_table.pop("vary", {}) if isinstance(run_table, dict) else {}
    run = read_table(Run, run_table, where, "run")
    run = _with_vary(run, vary_raw, robot, where)
    tracker = _plugin("tracker", doc.get("tracker", {"kind": "pure-pursuit"}), robot, where)
    estimator = _plugin("estimator", doc.get("estimator", {"kind": "truth"}), robot, where)
    control = read_params(_control_params(), doc.get("control", {}), where, "control")
    notes = _check_route(route, robot, fld, where, tracker)
    return Scenario(
        title=title,
        source=source,
        field=fld,
        robot=robot,
        sensors=sensors,
        route=route,
        tracker=tracker,
        estimator=estimator,
        control=control,
        run=run,
        document=doc,
        notes=tuple(notes),
    )


def _control_params() -> dict[str, Param]:
    from planners.control import WheelController

    return WheelController.PARAMS


def _plugin(what: str, table: object, robot: Robot, where: str) -> Plugin:
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: {what} must be a table, got {format_value(table)}")
    if what == "tracker":
        from planners.trackers import TRACKERS as registry
    else:
        from planners.estimators import ESTIMATORS as registry
    kind = table.get("kind")
    names = registry.names()
    if not isinstance(kind, str) or kind not in names:
        hint = did_you_mean(kind, names) if isinstance(kind, str) else ""
        raise ScenarioError(
            f"{where}: {what}.kind must be one of {', '.join(names)}, got {format_value(kind)}{hint}"
        )
    cls = registry.get(kind)
    chassis = getattr(cls, "CHASSIS", None)
    if chassis is not None and robot.chassis not in chassis:
        raise ScenarioError(
            f"{where}: {what}.kind {kind!r} drives only {', '.join(chassis)} chassis, "
            f"got robot.chassis {robot.chassis!r}"
        )
    rest = {k: v for k, v in table.items() if k != "kind"}
    params = read_params(getattr(cls, "PARAMS", {}), rest, where, what)
    return Plugin(kind=kind, params=params)


def _check_robot(robot: Robot, where: str) -> None:
    allowed = {"mecanum": (4,), "skid": (4, 6), "differential": (2,)}[robot.chassis]
    if robot.wheel_count not in allowed:
        raise ScenarioError(
            f"{where}: robot.wheels must be {' or '.join(map(str, allowed))} for a "
            f"{robot.chassis} chassis, got {robot.wheel_count}"
        )
    if robot.chassis in ("mecanum", "skid") and robot.wheelbase <= 0.0:
        raise ScenarioError(
            f"{where}: robot.wheelbase must be > 0 for a {robot.chassis} chassis, got {robot.wheelbase}"
        )
    if robot.motor.free_current >= robot.motor.stall_current:
        raise ScenarioError(
            f"{where}: robot.motor.free_current must be below stall_current "
            f"({robot.motor.stall_current:g} A), got {robot.motor.free_current:g} A"
        )
    length, width = robot.footprint
    if robot.track > width + 1e-9 or robot.wheelbase > length + 1e-9:
        raise ScenarioError(
            f"{where}: robot.track and robot.wheelbase must fit inside the footprint "
            f"{length:g} m x {width:g} m, got track {robot.track:g} m, wheelbase {robot.wheelbase:g} m"
        )


#: numeric robot keys that [run.vary] may randomise
def varyable_keys(robot: Robot) -> list[str]:
    """Dotted robot keys holding a number (what ``[run.vary]`` may randomise)."""
    from sim.schema import describe

    keys = []
    for key, p in describe(Robot):
        if p.dimension not in ("choice", "bool", "text", "count") and p.shape is None:
            keys.append(key)
    return keys


def robot_value(robot: Robot, key: str) -> float | None:
    """The value of a dotted robot key (``"traction.mu"``)."""
    node: Any = robot
    for part in key.split("."):
        node = getattr(node, part)
    if key == "inertia" and node is None:
        return robot.yaw_inertia
    return node


def _with_vary(run: Run, raw: object, robot: Robot, where: str) -> Run:
    if not isinstance(raw, dict):
        raise ScenarioError(f"{where}: run.vary must be a table, got {format_value(raw)}")
    allowed = varyable_keys(robot)
    out = []
    for key, value in raw.items():
        full = f"run.vary.{key}"
        if key not in allowed:
            hint = did_you_mean(key, allowed)
            raise ScenarioError(f"{where}: {full}: unknown robot key{hint}; allowed: {', '.join(allowed)}")
        if robot_value(robot, key) is None:
            raise ScenarioError(f"{where}: {full}: robot.{key} has no value to vary; set it first")
        if isinstance(value, str) and value.strip().endswith("%"):
            rel = to_si(value, "percent", where=f"{where}: {full}")
            if not 0.0 <= rel < 1.0:
                raise ScenarioError(f"{where}: {full} must be a percentage in [0, 100), got {value!r}")
            out.append(Vary(key=key, relative=rel))
        elif isinstance(value, list) and len(value) == 2:
            from sim.schema import describe

            p = dict(describe(Robot))[key]
            lo, hi = (read_value(Param(p.dimension), v, where, full) for v in value)
            if not lo < hi:
                raise ScenarioError(f"{where}: {full} must be [low, high] with low < high, got {value!r}")
            out.append(Vary(key=key, low=lo, high=hi))
        else:
            raise ScenarioError(
                f"{where}: {full} must be a percentage (\"5 %\") or [low, high], got {format_value(value)}"
            )
    return Run(**{**run.__dict__, "vary": tuple(out)})


def footprint_polygon(robot: Robot, pose: tuple[float, float, float]) -> Polygon:
    """The robot's outline at ``pose`` (x, y, heading) as a shapely polygon."""
    length, width = robot.footprint
    box = Polygon([(-length / 2, -width / 2), (length / 2, -width / 2), (length / 2, width / 2), (-length / 2, width / 2)])
    box = affinity.rotate(box, pose[2], origin=(0.0, 0.0), use_radians=True)
    return affinity.translate(box, pose[0], pose[1])


def _check_route(route: Route, robot: Robot, fld: Field, where: str, tracker: Plugin) -> list[str]:
    notes: list[str] = []
    driven = tracker.kind != "voltage-script"
    if driven and not route.waypoints:
        raise ScenarioError(f"{where}: route.waypoint must hold at least one [[route.waypoint]], got none")
    if route.heading != "tangent" and robot.chassis != "mecanum":
        raise ScenarioError(
            f"{where}: route.heading must be 'tangent' for a {robot.chassis} chassis "
            f"(only mecanum can hold or blend its heading), got {route.heading!r}"
        )
    why = fld.blocked(footprint_polygon(robot, route.start))
    if why:
        raise ScenarioError(
            f"{where}: route.start {format_value(list(route.start))}: the robot's footprint is {why}"
        )
    prev = route.start[:2]
    for i, wp in enumerate(route.waypoints):
        key = f"route.waypoint[{i}].at"
        why = fld.blocked(Point(wp.at))
        if why:
            raise ScenarioError(f"{where}: {key} must lie on the free floor, got {list(wp.at)} ({why})")
        if math.dist(prev, wp.at) < 1e-3:
            raise ScenarioError(
                f"{where}: {key} must differ from the point before it by at least 1 mm, got {list(wp.at)}"
            )
        prev = wp.at
    return notes
