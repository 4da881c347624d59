"""Numeric scenario keys as search axes: ``KEY=lo..hi`` ranges, their units and start values.

``skidpad tune --param`` and ``skidpad envelope --x/--y`` name a scenario key and a range,
e.g. ``tracker.lookahead=0.1m..0.6m``. :func:`parse_axis` finds the key's declared
:class:`~planners.params.Param` (its dimension and bounds), reads both ends with
:func:`sim.units.to_si` and checks them against those bounds, so a range is checked exactly
like the same value in a scenario file. Candidate values go back into the scenario as ``--set``
overrides in SI (:func:`override`).
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Any

from planners.errors import ScenarioError, did_you_mean, format_value
from planners.params import Param
from sim.scenario import Scenario, robot_value
from sim.schema import read_value
from sim.units import UNITS

#: dimensions a search axis cannot take (not a real number)
_NOT_NUMERIC = ("choice", "bool", "text", "count", "tables", "table", "pose")


@dataclass(frozen=True)
class Axis:
    """One searched key and its closed range, in SI.

    Attributes
    ----------
    key : str — dotted scenario key, e.g. ``"tracker.lookahead"``
    low, high : float — range ends [SI unit of the key's dimension], low < high
    dimension : str — the key's dimension (``"length"``, ``"dimensionless"``, ...)
    start : float or None — the scenario's value (None when it is derived, e.g. ``control.kV``)
    """

    key: str
    low: float
    high: float
    dimension: str
    start: float | None

    @property
    def unit(self) -> str:
        """SI unit symbol of the axis ("" for a plain number)."""
        return next(iter(UNITS.get(self.dimension, {})), "")

    @property
    def label(self) -> str:
        """Axis label for plots: ``key [unit]``."""
        return f"{self.key} [{self.unit}]" if self.unit else self.key


def numeric_keys(scenario: Scenario) -> dict[str, Param]:
    """Every numeric key of ``scenario`` that a search may set, with its Param."""
    from planners.control import WheelController
    from planners.estimators import ESTIMATORS
    from planners.routes import Route, Waypoint
    from planners.trackers import TRACKERS
    from sim.config_robot import Robot
    from sim.config_run import Run
    from sim.schema import describe

    tables: list[tuple[str, Any]] = [
        ("tracker", getattr(TRACKERS.get(scenario.tracker.kind), "PARAMS", {}).items()),
        ("estimator", getattr(ESTIMATORS.get(scenario.estimator.kind), "PARAMS", {}).items()),
        ("control", WheelController.PARAMS.items()),
        ("robot", describe(Robot)),
        ("route", ((k, p) for k, p in describe(Route) if not k.startswith("waypoint."))),
        ("run", describe(Run)),
    ]
    for i in range(len(scenario.route.waypoints)):
        tables.append((f"route.waypoint.{i}", describe(Waypoint)))
    return {
        f"{prefix}.{name}": p
        for prefix, items in tables
        for name, p in items
        if p.dimension not in _NOT_NUMERIC and p.shape is None
    }


def start_value(scenario: Scenario, key: str) -> float | None:
    """The scenario's value of a numeric key (None when not set and derived elsewhere)."""
    head, _, rest = key.partition(".")
    if head in ("tracker", "estimator"):
        value = getattr(scenario, head).params.get(rest)
    elif head == "control":
        value = scenario.control.get(rest)
    elif head == "robot":
        value = robot_value(scenario.robot, rest)
    elif head == "run":
        value = getattr(scenario.run, rest)
    elif rest.startswith("waypoint."):
        _, index, name = rest.split(".")
        value = getattr(scenario.route.waypoints[int(index)], name)
    else:
        value = getattr(scenario.route, rest)
    return None if value is None else float(value)


def parse_bounds(text: str, p: Param, *, where: str, key: str) -> tuple[float, float]:
    """``"lo..hi"`` (each a number or a quantity with a unit) -> (low, high) in SI."""
    lo, sep, hi = text.partition("..")
    example = f"e.g. {key}=0.1m..0.6m" if p.dimension == "length" else f"e.g. {key}=0.5..1.0"
    if not sep or not lo.strip() or not hi.strip():
        raise ScenarioError(f"{where}: {key} range must be low..high ({example}), got {text!r}")
    # each end is read like the same value in a scenario file (unit, dimension, bounds)
    ends = [read_value(p, float(v) if _is_number(v) else v, where, key) for v in (lo.strip(), hi.strip())]
    if not ends[0] < ends[1]:
        raise ScenarioError(f"{where}: {key} range must be low..high with low < high, got {text!r}")
    return ends[0], ends[1]


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def parse_axis(text: str, scenario: Scenario, *, where: str, option: str) -> Axis:
    """``KEY=lo..hi`` -> :class:`Axis`, checked against the key's declaration.

    Parameters
    ----------
    text : str — e.g. ``"tracker.lookahead=0.1m..0.6m"``
    scenario : Scenario — loaded with the run's ``--set`` overrides
    where : str — the scenario file, to start error messages
    option : str — the command-line option, e.g. ``"--param"``

    Raises
    ------
    ScenarioError — unknown or non-numeric key, malformed range, ends outside the key's bounds,
        or a robot key that ``[run.vary]`` draws from an absolute range (an override would be
        ignored)
    """
    key, sep, rng = text.partition("=")
    key = key.strip()
    if not sep or not key:
        raise ScenarioError(f"{where}: {option} must be KEY=low..high, got {text!r}")
    keys = numeric_keys(scenario)
    if key not in keys:
        _plugin_key_error(key, keys, scenario, where=where, option=option)
        hint = did_you_mean(key, keys)
        table = key.rpartition(".")[0]
        same = [k for k in keys if k.rpartition(".")[0] == table]
        allowed = ", ".join(same) if same else "tracker.<key>, estimator.<key>, control.<key>, robot.<key>, " \
            "route.<key>, route.waypoint.<i>.<key>, run.<key> (numeric keys)"
        raise ScenarioError(f"{where}: {option} {key}: must be a numeric scenario key{hint}; allowed: {allowed}")
    low, high = parse_bounds(rng, keys[key], where=f"{where}: {option}", key=key)
    if key.startswith("robot."):
        for v in scenario.run.vary:
            if v.key == key[len("robot."):] and v.relative is None:
                raise ScenarioError(
                    f"{where}: {option} {key}: run.vary.{v.key} draws it from "
                    f"{format_value([v.low, v.high])} in every run, so a search cannot set it; "
                    f"remove run.vary.{v.key} from the scenario or vary it by a percentage"
                )
    return Axis(key=key, low=low, high=high, dimension=keys[key].dimension, start=start_value(scenario, key))


def _plugin_key_error(key: str, keys: dict[str, Param], scenario: Scenario, *, where: str, option: str) -> None:
    """Raise a plain error for ``tracker.<name>`` / ``estimator.<name>`` that the scenario's kind
    does not have (naming the kinds that do); return for any other key."""
    from planners.estimators import ESTIMATORS
    from planners.trackers import TRACKERS

    table, _, name = key.partition(".")
    if table not in ("tracker", "estimator") or not name or "." in name:
        return
    registry = TRACKERS if table == "tracker" else ESTIMATORS
    kind = getattr(scenario, table).kind
    own = [k.partition(".")[2] for k in keys if k.startswith(f"{table}.")]
    numeric = {n: [k for k, p in getattr(registry.get(n), "PARAMS", {}).items()
                   if p.dimension not in _NOT_NUMERIC and p.shape is None] for n in registry.names()}
    close = difflib.get_close_matches(name, sorted({k for ks in numeric.values() for k in ks}), n=1, cutoff=0.6)
    wanted = name if any(name in ks for ks in numeric.values()) else (close[0] if close else None)
    have = [n for n, ks in numeric.items() if n != kind and wanted in ks]
    if wanted is None or wanted in own or not have:
        return  # a misspelling of one of its own keys, or of no plug-in's: the generic message
    spelled = "" if wanted == name else f" (did you mean {wanted!r}?)"
    raise ScenarioError(
        f"{where}: {option} {key}: the {kind} {table} has no key {name!r}{spelled} "
        f"(its numeric keys: {', '.join(own) or 'none'}); choose {'a' if table == 'tracker' else 'an'} {table} "
        f"that has it with --set {table}.kind={have[0]}" + (f" (or {', '.join(have[1:])})" if len(have) > 1 else "")
    )


def override(key: str, value: float) -> str:
    """A ``--set`` string putting an SI value into a key (exact: repr round-trips)."""
    return f"{key}={float(value)!r}"
