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
