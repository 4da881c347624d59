"""Load and validate field files (DESIGN.md §5) into :class:`sim.field.Field`."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry import Point, Polygon

from planners.errors import ScenarioError, format_value
from planners.params import Param
from sim.field import Field, Landmark, Patch
from sim.schema import read_params, read_value, reject_unknown
from sim.toml_files import read_toml

FIELD_KEYS = ("name", "boundary", "tile", "friction_scale", "obstacle", "landmark", "patch")


def _polygon(raw: object, where: str, key: str) -> np.ndarray:
    p = Param("length", shape=2)
    if not isinstance(raw, list) or len(raw) < 3:
        raise ScenarioError(
            f"{where}: {key} must be a list of at least 3 [x, y] points, got {format_value(raw)}"
        )
    pts = np.array([read_value(p, v, where, f"{key}[{i}]") for i, v in enumerate(raw)])
    poly = Polygon(pts)
    if not poly.is_valid or not shapely.is_simple(poly.exterior) or poly.area <= 0.0:
        reason = shapely.is_valid_reason(poly)
        raise ScenarioError(
            f"{where}: {key} must be a simple polygon (edges that do not cross), got one that is "
            f"not ({reason})"
        )
    return pts


def load_field(path: str | os.PathLike) -> Field:
    """Load and validate a field file.

    Raises
    ------
    ScenarioError
        For any malformed key, a boundary that is not a simple polygon, or obstacles,
        landmarks or patches outside the boundary.
    """
    where = str(path)
    doc = read_toml(path)
    reject_unknown(doc, FIELD_KEYS, where, "")
    name = doc.get("name", Path(path).stem)
    if not isinstance(name, str):
        raise ScenarioError(f"{where}: name must be a string, got {format_value(name)}")
    if "boundary" not in doc:
        raise ScenarioError(f"{where}: boundary: missing key (the wall polygon)")
    boundary = _polygon(doc["boundary"], where, "boundary")
    outline = Polygon(boundary)
    tile = None
    if "tile" in doc:
        tile = read_value(Param("length", gt=0.0), doc["tile"], where, "tile")
    scale = 1.0
    if "friction_scale" in doc:
        scale = read_value(Param("dimensionless", gt=0.0, le=5.0), doc["friction_scale"], where, "friction_scale")
    obstacles = []
    for i, ob in enumerate(_tables(doc, "obstacle", where)):
        key = f"obstacle[{i}]"
        reject_unknown(ob, ("polygon", "name"), where, key)
        if "polygon" not in ob:
            raise ScenarioError(f"{where}: {key}.polygon: missing key")
        poly = _polygon(ob["polygon"], where, f"{key}.polygon")
        if not outline.intersects(Polygon(poly)):
            raise ScenarioError(f"{where}: {key}.polygon must overlap the field, got one outside the boundary")
        obstacles.append(poly)
    landmarks = []
    for i, lm in enumerate(_tables(doc, "landmark", where)):
        key = f"landmark[{i}]"
        values = read_params(
            {"id": Param("count", ge=0), "at": Param("length", shape=2)}, lm, where, key
        )
        if outline.buffer(1e-9).disjoint(Point(values["at"])):
            raise ScenarioError(
                f"{where}: {key}.at must lie inside or on the boundary, got {format_value(lm['at'])}"
            )
        landmarks.append(Landmark(id=values["id"], at=values["at"]))
    patches = []
    for i, pt in enumerate(_tables(doc, "patch", where)):
        key = f"patch[{i}]"
        reject_unknown(pt, ("polygon", "friction_scale"), where, key)
        if "polygon" not in pt or "friction_scale" not in pt:
            raise ScenarioError(f"{where}: {key}: needs polygon and friction_scale")
        poly = _polygon(pt["polygon"], where, f"{key}.polygon")
        fs = read_value(Param("dimensionless", gt=0.0, le=5.0), pt["friction_scale"], where, f"{key}.friction_scale")
        patches.append(Patch(polygon=poly, friction_scale=fs))
    return Field(
        name=name,
        boundary=boundary,
        obstacles=tuple(obstacles),
        landmarks=tuple(landmarks),
        patches=tuple(patches),
        tile=tile,
        friction_scale=scale,
        source=where,
    )


def _tables(doc: dict, key: str, where: str) -> list:
    items = doc.get(key, [])
    if not isinstance(items, list) or not all(isinstance(i, dict) for i in items):
        raise ScenarioError(f"{where}: {key} must be an array of tables ([[{key}]]), got {format_value(items)}")
    return items
