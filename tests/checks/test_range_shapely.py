"""Range sensor readings against shapely's geometry (reference library: shapely 2)."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, Point

from sim.config_sensors import RangeSensor, SensorSuite
from sim.field import Field
from sim.sensors import Sensors

OBSTACLE = np.array([[1.5, 1.5], [2.1, 1.5], [2.1, 2.1], [1.5, 2.1]])


def loading_dock() -> Field:
    return Field(
        name="loading dock",
        boundary=np.array([[0, 0], [3.6, 0], [3.6, 3.6], [1.8, 4.2], [0, 3.6]]),
        obstacles=(OBSTACLE,),
    )


def shapely_range(field: Field, origin: np.ndarray, angle: float, max_range: float) -> float:
    """Distance from origin to the first wall or obstacle edge along the ray, by shapely."""
    end = origin + max_range * np.array([np.cos(angle), np.sin(angle)])
    walls = shapely.union_all([field.outline.boundary, *[o.boundary for o in field.obstacle_shapes]])
    hit = LineString([origin, end]).intersection(walls)
    return np.inf if hit.is_empty else float(Point(origin).distance(hit))


SENSORS = (
    RangeSensor(at=(0.2, 0.0), direction=0.0, max_range=4.0),
    RangeSensor(at=(0.0, 0.15), direction=np.pi / 2, max_range=4.0),
    RangeSensor(at=(-0.2, -0.1), direction=-2.5, max_range=0.35),
)
POSES = np.array(
    [[0.6, 1.8, 0.0], [0.4, 0.4, 0.785398], [3.0, 3.0, 2.2], [1.0, 3.0, -0.3], [2.6, 0.7, 1.9]]
)


def test_noise_free_ranges_equal_shapely_distance_along_the_ray():
    field = loading_dock()
    sensors = Sensors(SensorSuite(range=SENSORS), field=field, wheel_count=2, dt=0.01)
    sensors.reset([np.random.default_rng(k) for k in range(len(POSES))], POSES)
    r = sensors.read(0.0, POSES, np.zeros((len(POSES), 2)))
    finite = 0
    for i, (x, y, h) in enumerate(POSES):
        for j, s in enumerate(SENSORS):
            c, sn = np.cos(h), np.sin(h)
            origin = np.array([x + c * s.at[0] - sn * s.at[1], y + sn * s.at[0] + c * s.at[1]])
            ref = shapely_range(field, origin, h + s.direction, s.max_range)
            finite += np.isfinite(ref)
            assert r.ranges[i, j] == pytest.approx(ref, abs=1e-12)
    assert r.range_valid.all()
    assert 0 < finite < len(POSES) * len(SENSORS)  # both hits and out-of-range cases


def test_ray_that_hits_the_obstacle_first():
    # from (0.6, 1.8) facing +x the obstacle's west face is at x = 1.5: 0.9 m minus mount 0.2
    field = loading_dock()
    sensors = Sensors(SensorSuite(range=SENSORS[:1]), field=field, wheel_count=2, dt=0.01)
    sensors.reset([np.random.default_rng(0)], POSES[:1])
    assert sensors.read(0.0, POSES[:1], np.zeros((1, 2))).ranges[0, 0] == pytest.approx(0.7, abs=1e-12)


def _inside_dock(k: int, rng: np.random.Generator) -> np.ndarray:
    # points on the loading dock's floor, off the obstacle (shapely decides)
    field = loading_dock()
    free = field.outline.difference(field.obstacle_shapes[0])
    pts = rng.uniform([0.0, 0.0], [3.6, 4.2], (4 * k, 2))
    return pts[shapely.contains_xy(free, pts[:, 0], pts[:, 1])][:k]


def test_many_rays_cast_together_equal_shapely_distance_along_the_ray():
    # 300 rays in one call take the blocked, vectorised path of the ray cast
    field = loading_dock()
    rng = np.random.default_rng(np.random.SeedSequence(300))
    origin = _inside_dock(300, rng)
    angle = rng.uniform(-np.pi, np.pi, origin.shape[0])
    got = field.ray_cast(origin, angle, 3.0)
    ref = np.array([shapely_range(field, o, a, 3.0) for o, a in zip(origin, angle)])
    assert np.isinf(got).any() and np.isfinite(got).any()
    np.testing.assert_array_equal(np.isinf(got), np.isinf(ref))
    assert got[np.isfinite(got)] == pytest.approx(ref[np.isfinite(ref)], abs=1e-12)


def test_rays_aimed_at_corners_hit_the_corner():
    # A ray from inside a polygon must leave it; aimed at a corner it meets the boundary at
    # that corner (shapely: the distance from the origin to the corner point), however the
    # rounding of the two walls' end tests falls. The obstacle's corners, seen from outside
    # it, are hit at the corner too. 2000 rays, both code paths (one call, and one by one).
    field = loading_dock()
    rng = np.random.default_rng(np.random.SeedSequence(4))
    origin = _inside_dock(2000, rng)
    corners = np.vstack([field.boundary, OBSTACLE])
    aim = corners[rng.integers(0, len(corners), origin.shape[0])]
    angle = np.arctan2(aim[:, 1] - origin[:, 1], aim[:, 0] - origin[:, 0])
    walls = shapely.union_all([field.outline.boundary, *[o.boundary for o in field.obstacle_shapes]])
    seen = np.array([
        LineString([o, a]).intersection(walls).difference(Point(a).buffer(1e-9)).is_empty
        for o, a in zip(origin, aim)
    ])  # nothing in the way short of the corner
    corner = np.array([Point(o).distance(Point(a)) for o, a in zip(origin, aim)])
    together = field.ray_cast(origin, angle)
    one_by_one = np.array([field.ray_cast(o[None], a)[0] for o, a in zip(origin[:200], angle[:200])])
    assert seen.sum() > 1000
    assert together[seen] == pytest.approx(corner[seen], abs=1e-12)
    np.testing.assert_array_equal(one_by_one, together[:200])


def test_rays_just_past_a_free_corner():
    # along the diagonal through the obstacle's south-east corner (2.1, 1.5), from (1.1, 0.5)
    # moved 1e-9 m up or right: one ray meets the obstacle's south face at about sqrt(2) m,
    # the other slips past the corner to the east wall, 2.5 sqrt(2) m away (shapely, as
    # the other checks)
    field = loading_dock()
    origin = np.array([[1.1, 0.5 + 1e-9], [1.1 + 1e-9, 0.5]])
    angle = np.full(2, np.pi / 4)
    ref = [shapely_range(field, o, a, 10.0) for o, a in zip(origin, angle)]
    assert ref == pytest.approx([np.sqrt(2.0), 2.5 * np.sqrt(2.0)], abs=1e-8)
    assert field.ray_cast(origin, angle) == pytest.approx(ref, abs=1e-12)
