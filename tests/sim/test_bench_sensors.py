"""The sensors benchmark's wiring (its figures are speeds, never asserted)."""

from __future__ import annotations

import math

from sim.bench_sensors import bench_sensors


def test_bench_sensors_reports_each_part_and_the_ratio_to_physics():
    out = bench_sensors(sizes=(3,), ticks=8, quick=True)
    row = out["n=3"]
    assert set(row) == {"sensors_s", "odometry_s", "total_s", "physics_s", "total_over_physics"}
    assert all(math.isfinite(v) and v > 0.0 for v in row.values())
    assert row["total_over_physics"] == row["total_s"] / row["physics_s"]
