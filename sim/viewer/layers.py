"""The layers of the picture, each drawn through a :class:`~sim.viewer.draw.Canvas`.

Every layer is a function ``draw(canvas, scene, k)`` for tick ``k`` and has a key that toggles
it (:data:`LAYERS`, listed in the help overlay). Static layers (the field and the path) do not
change with time and are drawn into a cached background; so are the faint trails of a batch.
Widths are in pixels and scale with the window height so a projected picture stays legible.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon

from sim.viewer import palette as pal
from sim.viewer.scene import (
    Scene,
    body_to_field,
    covariance_ellipse,
    drive_force,
    outline,
    wheel_layout,
    wheel_outline,
)

if TYPE_CHECKING:  # pragma: no cover
    from sim.viewer.draw import Canvas

FIX_SHOW_S = 0.6  # a fix stays on screen this long, fading [s]
SLIP_ARROW_S = 0.5  # slip arrow length = slip speed x this [s]
MAX_TRAIL = 1500  # points per drawn trail
MAX_FAINT_TRAIL = 250


def px(canvas: Canvas, n: float) -> int:
    """``n`` pixels at a 800-pixel-high window, scaled to this canvas (at least 1)."""
    return max(1, round(n * canvas.size[1] / 800.0))


def _thin(points: np.ndarray, limit: int) -> np.ndarray:
    """At most ``limit`` evenly spaced rows of ``points``, always keeping the last."""
    points = points[np.isfinite(points).all(axis=1)]
    if len(points) <= limit:
        return points
    step = int(np.ceil(len(points) / limit))
    return np.vstack([points[::step], points[-1:]])


def arrows(canvas: Canvas, start: np.ndarray, vec: np.ndarray, color: pal.Color, *, width: int) -> None:
    """Arrows from ``start`` (K, 2) along ``vec`` (K, 2) [m], heads a fixed size in pixels."""
    length = np.hypot(vec[:, 0], vec[:, 1])
    keep = length * canvas.transform.scale > 2.0
    if not keep.any():
        return
    start, vec, length = start[keep], vec[keep], length[keep]
    tip = start + vec
    head = px(canvas, 9) / canvas.transform.scale
    u = vec / length[:, None]
    n = np.column_stack([-u[:, 1], u[:, 0]])
    h = np.minimum(head, 0.5 * length)[:, None]
    canvas.segments(start, tip, color, width=width)
    canvas.segments(tip, tip - h * u + 0.6 * h * n, color, width=width)
    canvas.segments(tip, tip - h * u - 0.6 * h * n, color, width=width)


# ---------------------------------------------------------------------- static layers


def draw_field(canvas: Canvas, scene: Scene, k: int = 0) -> None:
    """Floor, floor patches, tiles, obstacles, walls and landmarks."""
    fld = scene.scenario.field
    canvas.polygon(fld.boundary, fill=pal.FLOOR)
    for patch in fld.patches:
        canvas.polygon(patch.polygon, fill=pal.PATCH, edge=pal.PATCH_EDGE, width=px(canvas, 1))
        c = np.asarray(patch.polygon).mean(axis=0)
        canvas.label(c, f"grip \u00d7{patch.friction_scale:g}", pal.PATCH_EDGE, size=px(canvas, 18))
    if fld.tile:
        x0, y0, x1, y1 = fld.bounds
        lines = [LineString([(x, y0), (x, y1)]) for x in np.arange(x0 + fld.tile, x1 - 1e-9, fld.tile)]
        lines += [LineString([(x0, y), (x1, y)]) for y in np.arange(y0 + fld.tile, y1 - 1e-9, fld.tile)]
        for piece in shapely.intersection(np.array(lines, dtype=object), fld.outline):
            for part in getattr(piece, "geoms", [piece]):
                if isinstance(part, LineString) and not part.is_empty:
                    canvas.polyline(np.asarray(part.coords), pal.TILE_LINE, width=1)
    for ob in fld.obstacles:
        canvas.polygon(ob, fill=pal.OBSTACLE, edge=pal.WALL, width=px(canvas, 2))
    canvas.polyline(fld.boundary, pal.WALL, width=px(canvas, 5), closed=True)
    if fld.landmarks:
        xy = fld.landmark_xy
        canvas.dots(xy, px(canvas, 6), pal.LANDMARK, edge=pal.FLOOR)
        inward = np.asarray(fld.outline.centroid.coords[0])
        for lm, p in zip(fld.landmarks, xy):
            d = inward - p
            d = d / max(np.hypot(*d), 1e-9) * 16 * px(canvas, 1) / canvas.transform.scale
            canvas.label(p + d, str(lm.id), pal.LANDMARK, size=px(canvas, 18))


def draw_path(canvas: Canvas, scene: Scene, k: int = 0) -> None:
    """The path, coloured by planned speed (light = slow, dark = fast), and the waypoints."""
    if len(scene.path) >= 2:
        idx = np.arange(len(scene.path))
        if len(idx) > 900:
            idx = np.unique(np.r_[np.linspace(0, len(idx) - 1, 900).astype(int), len(idx) - 1])
        pts = scene.path[idx]
        top = max(float(np.nanmax(scene.path_speed)), 1e-9) if scene.path_speed.size else 1.0
        mid = 0.5 * (scene.path_speed[idx][1:] + scene.path_speed[idx][:-1])
        canvas.polyline(pts, pal.PATH_UNDER, width=px(canvas, 7))
        canvas.segments(pts[:-1], pts[1:], pal.ramp(mid / top), width=px(canvas, 5))
    wps = np.array([w.at for w in scene.scenario.route.waypoints]).reshape(-1, 2)
    if len(wps):
        canvas.dots(wps, px(canvas, 5), pal.FLOOR, edge=pal.PATH_UNDER)


def draw_spread(canvas: Canvas, scene: Scene, k: int = 0) -> None:
    """Faint full trails of every track but the chosen one (a batch's spread)."""
    for i, tr in enumerate(scene.tracks):
        if i != scene.highlight:
            key = ("faint", tr.last())
            if key not in tr.memo:
                tr.memo[key] = _thin(tr.data["pose"][: tr.last() + 1, :2], MAX_FAINT_TRAIL)
            canvas.polyline(tr.memo[key], pal.FAINT_TRAIL, width=1)


# ---------------------------------------------------------------------- per-tick layers


def draw_reference(canvas: Canvas, scene: Scene, k: int) -> None:
    """Ghost outline of the plan's reference pose."""
    tr = scene.chosen
    ref = tr.data["reference"][tr.at(k)]
    if np.isfinite(ref).all():
        _outline_with_nose(canvas, scene, ref, pal.REFERENCE, px(canvas, 2))


def draw_truth(canvas: Canvas, scene: Scene, k: int) -> None:
    """True footprints: the chosen robot filled with its wheels, the others as faint outlines."""
    body = outline(scene.robot)
    if len(scene.tracks) > 1:
        poses = scene.poses("pose", k)
        others = np.delete(poses, scene.highlight, axis=0)
        others = others[np.isfinite(others).all(axis=1)]
        for poly in body_to_field(others, body):
            canvas.polygon(poly, edge=pal.FAINT, width=1)
    tr = scene.chosen
    pose = tr.data["pose"][tr.at(k)]
    if not np.isfinite(pose).all():
        return
    canvas.polygon(body_to_field(pose, body)[0], fill=pal.TRUTH, edge=pal.TRUTH_EDGE, width=px(canvas, 2))
    wheel = wheel_outline(scene.robot)
    for c in wheel_layout(scene.robot):
        canvas.polygon(body_to_field(pose, wheel + c)[0], fill=pal.WHEEL)
    length, width = scene.robot.footprint
    nose = np.array([[0.5 * length - 0.02, 0.0], [0.5 * length - 0.14 * length, 0.18 * width],
                     [0.5 * length - 0.14 * length, -0.18 * width]])
    canvas.polygon(body_to_field(pose, nose)[0], fill=pal.NOSE)


def draw_estimate(canvas: Canvas, scene: Scene, k: int) -> None:
    """Estimated pose as an outline, with its 95 % position ellipse when the estimator has one."""
    tr = scene.chosen
    j = tr.at(k)
    est = tr.data["estimate"][j]
    if not np.isfinite(est).all():
        return
    _outline_with_nose(canvas, scene, est, pal.ESTIMATE, px(canvas, 3))
    cov = tr.data["covariance"][j][:2, :2]
    if np.isfinite(cov).all() and np.trace(cov) > 0.0:
        canvas.polyline(covariance_ellipse(est[:2], cov), pal.ESTIMATE, width=px(canvas, 2), closed=True)


def draw_trail(canvas: Canvas, scene: Scene, k: int) -> None:
    """Where the chosen robot has been (truth) and where it believed it was (estimate)."""
    if len(scene.tracks) > 1 and scene.live is not None:
        draw_spread(canvas, scene, k)
    tr = scene.chosen
    j = tr.at(k) + 1
    est = _thin(tr.data["estimate"][:j, :2], MAX_TRAIL)
    canvas.polyline(est, pal.mix(pal.ESTIMATE, pal.FLOOR, 0.35), width=1)
    canvas.polyline(_thin(tr.data["pose"][:j, :2], MAX_TRAIL), pal.TRAIL, width=px(canvas, 2))


def draw_sensors(canvas: Canvas, scene: Scene, k: int) -> None:
    """Range-sensor rays to their first hit, and absolute fixes as they arrive (fading)."""
    tr = scene.chosen
    j = tr.at(k)
    pose = tr.data["pose"][j]
    sensors = scene.scenario.sensors.range
    if sensors and np.isfinite(pose).all():
        at = body_to_field(pose, np.array([s.at for s in sensors]))[0]
        angle = pose[2] + np.array([s.direction for s in sensors])
        reach = np.array([s.max_range for s in sensors])
        dist = np.array([scene.scenario.field.ray_cast(at[i:i + 1], angle[i:i + 1], reach[i])[0]
                         for i in range(len(sensors))])
        hit = np.isfinite(dist)
        end = at + np.where(hit, dist, reach)[:, None] * np.column_stack([np.cos(angle), np.sin(angle)])
        canvas.segments(at, end, pal.RAY, width=px(canvas, 2))
        if hit.any():
            canvas.dots(end[hit], px(canvas, 4), pal.RAY, edge=pal.WALL)
    back = round(FIX_SHOW_S / scene.dt)
    fixes = tr.data["fix"][max(0, j - back): j + 1]
    seen = np.flatnonzero(np.isfinite(fixes).all(axis=1))
    for i in seen:
        age = (len(fixes) - 1 - i) * scene.dt / FIX_SHOW_S
        color = pal.mix(pal.FIX, pal.FLOOR, 0.8 * age)
        fx = fixes[i]
        tick = fx[:2] + 12 * px(canvas, 1) / canvas.transform.scale * np.array([np.cos(fx[2]), np.sin(fx[2])])
        canvas.segments(fx[None, :2], tick[None], color, width=px(canvas, 2))
        canvas.dots(fx[None, :2], px(canvas, 5), color)


def draw_forces(canvas: Canvas, scene: Scene, k: int) -> None:
    """Per wheel: drive force from motor current (black) and slip speed (yellow), body x axis."""
    tr = scene.chosen
    j = tr.at(k)
    pose = tr.data["pose"][j]
    if not np.isfinite(pose).all():
        return
    robot = scene.robot
    centres = body_to_field(pose, wheel_layout(robot))[0]
    ahead = np.array([np.cos(pose[2]), np.sin(pose[2])])
    side = np.array([-ahead[1], ahead[0]])
    weight_share = robot.mass * 9.80665 / robot.wheel_count
    force = np.nan_to_num(drive_force(robot, tr.data["current"][j]))
    scale = 0.5 * robot.footprint[0] / weight_share  # one wheel's weight share -> half the length
    arrows(canvas, centres, (force * scale)[:, None] * ahead[None], pal.FORCE, width=px(canvas, 3))
    slip = np.nan_to_num(tr.data["slip"][j]) * SLIP_ARROW_S
    outward = np.sign(wheel_layout(robot)[:, 1])[:, None] * side[None] * 1.2 * robot.wheel_radius
    arrows(canvas, centres + outward, slip[:, None] * ahead[None], pal.SLIP, width=px(canvas, 3))


def draw_target(canvas: Canvas, scene: Scene, k: int) -> None:
    """The tracker's target (lookahead) point, joined to the estimated pose it steers from."""
    tr = scene.chosen
    j = tr.at(k)
    target = tr.data["target"][j]
    if not np.isfinite(target).all():
        return
    est = tr.data["estimate"][j]
    if np.isfinite(est).all():
        canvas.segments(est[None, :2], target[None], pal.TARGET, width=px(canvas, 2))
    canvas.dots(target[None], px(canvas, 7), pal.FLOOR, edge=pal.TARGET)
    canvas.crosses(target[None], px(canvas, 5), pal.TARGET, width=px(canvas, 2))


def draw_collisions(canvas: Canvas, scene: Scene, k: int) -> None:
    """A mark where each contact with a wall or obstacle began, up to tick ``k``."""
    show = range(len(scene.tracks)) if len(scene.tracks) <= 8 else [scene.highlight]
    fld = scene.scenario.field
    for i in show:
        tr = scene.tracks[i]
        touching = tr.contacts(scene.robot, scene.scenario)[: tr.at(k) + 1]
        onset = np.flatnonzero(touching & ~np.r_[False, touching[:-1]])
        if onset.size == 0:
            continue
        marks = []
        for j in onset:
            poly = Polygon(body_to_field(tr.data["pose"][j], outline(scene.robot))[0])
            contact = poly.difference(fld.outline)
            for ob in fld.obstacle_shapes:
                contact = contact.union(poly.intersection(ob))
            where = contact if not contact.is_empty else poly
            marks.append(np.asarray(where.centroid.coords[0]))
        canvas.crosses(np.array(marks), px(canvas, 8), pal.COLLISION, width=px(canvas, 4))


def _outline_with_nose(canvas: Canvas, scene: Scene, pose: np.ndarray, color: pal.Color, width: int) -> None:
    body = outline(scene.robot)
    canvas.polygon(body_to_field(pose, body)[0], edge=color, width=width)
    tip = body_to_field(pose, np.array([[0.0, 0.0], [0.5 * scene.robot.footprint[0], 0.0]]))[0]
    canvas.segments(tip[:1], tip[1:], color, width=width)


@dataclass(frozen=True)
class Layer:
    """A toggled layer: its key, its name in the help overlay and its drawing function."""

    key: str
    name: str
    draw: Callable[[Canvas, Scene, int], None]
    static: bool = False


#: in drawing order (bottom first); keys 1..9, 0
LAYERS: tuple[Layer, ...] = (
    Layer("1", "field", draw_field, static=True),
    Layer("2", "path by planned speed", draw_path, static=True),
    Layer("0", "collision marks", draw_collisions),
    Layer("6", "trail", draw_trail),
    Layer("4", "true footprint", draw_truth),
    Layer("3", "reference pose", draw_reference),
    Layer("7", "sensor rays and fixes", draw_sensors),
    Layer("8", "wheel force / slip", draw_forces),
    Layer("5", "estimate + ellipse", draw_estimate),
    Layer("9", "tracker target", draw_target),
)


def draw_scene(canvas: Canvas, scene: Scene, k: int, on: frozenset[str]) -> None:
    """Every enabled layer (names in ``on``) at tick ``k``, static ones from the cache."""
    static = [ly for ly in LAYERS if ly.static and ly.name in on]
    spread = "trail" in on and len(scene.tracks) > 1 and scene.live is None

    def background(c: Canvas) -> None:
        for ly in static:
            if ly.name == "path by planned speed" and spread:
                draw_spread(c, scene, 0)  # under the path, so the path stays readable
            ly.draw(c, scene, 0)
        if spread and not any(ly.name == "path by planned speed" for ly in static):
            draw_spread(c, scene, 0)

    key = (id(scene), tuple(ly.name for ly in static), spread, scene.highlight if spread else -1)
    canvas.cached(key, scene.scenario.field.bounds, background, pal.OUTSIDE)
    for ly in LAYERS:
        if not ly.static and ly.name in on:
            ly.draw(canvas, scene, k)
