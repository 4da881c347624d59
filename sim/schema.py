"""Read TOML tables against declared parameters, strictly.

One reader for every table of every file: each dataclass field carries a
:class:`~planners.params.Param` in its metadata (``metadata={"param": Param(...)}``); plug-ins
declare a ``PARAMS`` dict of the same. The reader checks type, dimension, range and allowed
choices, converts units to SI, fills defaults, and rejects unknown keys with a suggestion.
Every failure is a :class:`~planners.errors.ScenarioError` in the project's one-line form.
"""

from __future__ import annotations

import dataclasses
import math
import typing
from collections.abc import Mapping
from functools import lru_cache
from typing import Any

from planners.errors import ScenarioError, did_you_mean, format_value
from planners.params import REQUIRED, Param
from sim.units import UNITS, to_si

#: file key -> dataclass field name, where the file's singular reads better
KEY_ALIASES: dict[tuple[str, str], str] = {("Route", "waypoint"): "waypoints"}


def _key(prefix: str, name: str) -> str:
    return f"{prefix}.{name}" if prefix else name


def _fail(where: str, key: str, allowed: str, value: object) -> ScenarioError:
    return ScenarioError(f"{where}: {key} must be {allowed}, got {format_value(value)}")


def check_bounds(p: Param, value: float, where: str, key: str, raw: object) -> float:
    """Raise unless ``value`` satisfies the bounds of ``p``."""
    if (
        (p.gt is not None and not value > p.gt)
        or (p.ge is not None and not value >= p.ge)
        or (p.lt is not None and not value < p.lt)
        or (p.le is not None and not value <= p.le)
    ):
        raise _fail(where, key, p.allowed(), raw)
    return value


def _scalar(p: Param, raw: object, where: str, key: str) -> Any:
    dim = p.dimension
    if dim == "choice":
        if not isinstance(raw, str) or raw not in (p.choices or ()):
            hint = did_you_mean(raw, p.choices or ()) if isinstance(raw, str) else ""
            raise ScenarioError(
                f"{where}: {key} must be {p.allowed()}, got {format_value(raw)}{hint}"
            )
        return raw
    if dim == "bool":
        if not isinstance(raw, bool):
            raise _fail(where, key, "true or false", raw)
        return raw
    if dim == "text":
        if not isinstance(raw, str):
            raise _fail(where, key, "a string", raw)
        return raw
    if dim == "count":
        if isinstance(raw, bool) or not isinstance(raw, int):
            raise _fail(where, key, "an integer", raw)
        return int(check_bounds(p, raw, where, key, raw))
    if dim == "dimensionless":
        if isinstance(raw, str) and raw.strip().endswith("%"):
            value = to_si(raw, "percent", where=f"{where}: {key}")
        elif isinstance(raw, (int, float)) and not isinstance(raw, bool):
            value = float(raw)
            if not math.isfinite(value):
                raise _fail(where, key, "a finite number", raw)
        else:
            raise _fail(where, key, "a number", raw)
        return check_bounds(p, value, where, key, raw)
    if dim not in UNITS:
        raise ScenarioError(f"{where}: {key}: internal: unknown dimension {dim!r}")
    value = to_si(raw, dim, where=f"{where}: {key}")
    return check_bounds(p, value, where, key, raw)


def read_value(p: Param, raw: object, where: str, key: str) -> Any:
    """Convert one raw TOML value for the declared parameter ``p`` (not tables)."""
    if p.shape is None:
        return _scalar(p, raw, where, key)
    if not isinstance(raw, list):
        raise _fail(where, key, f"a list of {p.shape if p.shape > 0 else 'one or more'} values", raw)
    if (p.shape > 0 and len(raw) != p.shape) or (p.shape < 0 and len(raw) == 0):
        want = f"{p.shape} values" if p.shape > 0 else "one or more values"
        raise _fail(where, key, f"a list of {want}", raw)
    if p.dimension == "pose":
        lin = dataclasses.replace(p, dimension="length", shape=None)
        ang = dataclasses.replace(p, dimension="angle", shape=None)
        return (
            _scalar(lin, raw[0], where, f"{key}[0]"),
            _scalar(lin, raw[1], where, f"{key}[1]"),
            _scalar(ang, raw[2], where, f"{key}[2]"),
        )
    one = dataclasses.replace(p, shape=None)
    return tuple(_scalar(one, v, where, f"{key}[{i}]") for i, v in enumerate(raw))


def reject_unknown(table: Mapping, known: typing.Iterable[str], where: str, prefix: str) -> None:
    """Raise for the first key of ``table`` not in ``known``, suggesting the closest."""
    known = list(known)
    for name in table:
        if name not in known:
            hint = did_you_mean(name, known)
            hint = f" (did you mean {_key(prefix, hint[len('; did you mean '):-1])}?)" if hint else ""
            allowed = ", ".join(known)
            raise ScenarioError(
                f"{where}: {_key(prefix, name)}: unknown key{hint}; allowed: {allowed}"
            )


def _require_table(raw: object, where: str, key: str) -> Mapping:
    if not isinstance(raw, Mapping):
        raise _fail(where, key, "a table", raw)
    return raw


def read_params(schema: Mapping[str, Param], table: Mapping, where: str, prefix: str) -> dict:
    """Read a table against a ``name -> Param`` schema (plug-in ``PARAMS``) into a dict."""
    table = _require_table(table, where, prefix)
    reject_unknown(table, schema, where, prefix)
    out: dict[str, Any] = {}
    for name, p in schema.items():
        key = _key(prefix, name)
        if name not in table:
            if p.default is REQUIRED:
                raise ScenarioError(f"{where}: {key}: missing key ({p.doc or p.dimension})")
            out[name] = p.default
        elif p.dimension == "tables":
            items = table[name]
            if not isinstance(items, list) or not all(isinstance(i, Mapping) for i in items):
                raise _fail(where, key, "an array of tables", items)
            out[name] = tuple(
                read_params(p.item or {}, it, where, f"{key}[{i}]") for i, it in enumerate(items)
            )
        else:
            out[name] = read_value(p, table[name], where, key)
    return out


@lru_cache(maxsize=None)
def _hints(cls: type) -> dict[str, Any]:
    return typing.get_type_hints(cls)


def _inner_class(tp: Any) -> type | None:
    """The dataclass inside ``X``, ``X | None`` or ``tuple[X, ...]``."""
    if dataclasses.is_dataclass(tp):
        return tp
    for arg in typing.get_args(tp):
        found = _inner_class(arg)
        if found is not None:
            return found
    return None


def read_table(cls: type, table: object, where: str, prefix: str) -> Any:
    """Read a table into the frozen dataclass ``cls`` using its fields' ``Param`` metadata."""
    table = _require_table(table, where, prefix)
    fields = [f for f in dataclasses.fields(cls) if "param" in f.metadata]
    file_keys = {f.name: f.name for f in fields}
    for (owner, file_key), field_name in KEY_ALIASES.items():
        if owner == cls.__name__:
            file_keys[field_name] = file_key
    reject_unknown(table, file_keys.values(), where, prefix)
    values: dict[str, Any] = {}
    for f in fields:
        p: Param = f.metadata["param"]
        file_key = file_keys[f.name]
        key = _key(prefix, file_key)
        if file_key not in table:
            if p.default is REQUIRED:
                raise ScenarioError(f"{where}: {key}: missing key ({p.doc or p.dimension})")
            continue  # the dataclass default applies
        raw = table[file_key]
        if p.dimension == "table":
            values[f.name] = read_table(_inner_class(_hints(cls)[f.name]), raw, where, key)
        elif p.dimension == "tables":
            sub = _inner_class(_hints(cls)[f.name])
            if not isinstance(raw, list) or not all(isinstance(i, Mapping) for i in raw):
                raise _fail(where, key, "an array of tables", raw)
            if sub is None:
                values[f.name] = tuple(
                    read_params(p.item or {}, it, where, f"{key}[{i}]") for i, it in enumerate(raw)
                )
            else:
                values[f.name] = tuple(
                    read_table(sub, it, where, f"{key}[{i}]") for i, it in enumerate(raw)
                )
        else:
            values[f.name] = read_value(p, raw, where, key)
    return cls(**values)


def describe(cls: type, prefix: str = "") -> list[tuple[str, Param]]:
    """Every key of ``cls`` (recursively) with its Param, for the README reference table."""
    rows: list[tuple[str, Param]] = []
    names = {f.name: f.name for f in dataclasses.fields(cls)}
    for (owner, file_key), field_name in KEY_ALIASES.items():
        if owner == cls.__name__:
            names[field_name] = file_key
    for f in dataclasses.fields(cls):
        if "param" not in f.metadata:
            continue
        p = f.metadata["param"]
        key = _key(prefix, names[f.name])
        inner = _inner_class(_hints(cls)[f.name]) if p.dimension in ("table", "tables") else None
        if inner is not None:
            rows.extend(describe(inner, key))
        else:
            rows.append((key, p))
    return rows
