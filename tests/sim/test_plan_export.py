"""sim/plan_export.py: the plan CSV (one row per tick) and the plot PNG."""

from __future__ import annotations

import numpy as np
from shapely.geometry import Polygon

from planners.routes import Route, Waypoint
from planners.timing import time_route
from sim.plan_export import CSV_COLUMNS, write_plan_csv, write_plan_plot


def _plan():
    route = Route(start=(0.0, 0.0, 0.0), max_speed=1.0, max_accel=1.0, max_turn_rate=2.0,
                  waypoints=(Waypoint(at=(1.5, 0.0), speed=0.5), Waypoint(at=(2.0, 1.0)),
                             Waypoint(at=(1.0, 1.0), reverse=True)))
    return time_route(route, chassis="differential", rate=100.0)


def test_csv_has_one_row_per_tick_and_round_trips(tmp_path):
    plan = _plan()
    out = tmp_path / "plan.csv"
    write_plan_csv(plan, out)
    header = out.read_text().splitlines()[0]
    assert header == "t,x,y,heading,vx,vy,omega,ax,ay,alpha,curvature,s"
    data = np.loadtxt(out, delimiter=",", skiprows=1)
    assert data.shape == (len(plan.t), len(CSV_COLUMNS))
    assert np.allclose(data[:, 0], plan.t, rtol=1e-9)
    assert np.allclose(data[:, 1:4], plan.pose, rtol=1e-8, atol=1e-12)
    assert np.allclose(data[:, 11], plan.s, rtol=1e-8)


def test_plot_is_written(tmp_path):
    out = tmp_path / "plan.png"
    write_plan_plot(_plan(), out, free_space=Polygon([(-1, -1), (3, -1), (3, 2), (-1, 2)]))
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and out.stat().st_size > 10_000
