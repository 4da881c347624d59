"""Every tracker completes every bundled library route it can drive (seed 1, default gains)."""

from __future__ import annotations

from pathlib import Path

import pytest

from planners.trackers import TRACKERS
from sim.runner import Simulation
from sim.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[2]
ROUTES = ("figure-eight", "slalom", "square-dwell", "aisle-s", "hairpin", "long-straight")
CASES = [
    (route, chassis, kind)
    for route in ROUTES
    for chassis in ("mecanum", "skid")
    for kind in TRACKERS.names()
    if kind != "voltage-script" and chassis in TRACKERS.get(kind).CHASSIS
]


@pytest.mark.parametrize("route,chassis,kind", CASES, ids=["-".join(c) for c in CASES])
def test_every_tracker_completes_every_library_route(route, chassis, kind):
    sc = load_scenario(
        ROOT / "scenarios" / f"{route}-{chassis}.toml",
        [f'tracker={{kind="{kind}"}}', 'estimator={kind="truth"}', "run.seed=1"],
    )
    card = Simulation(sc, runs=[0]).run()[0].scorecard
    assert card["status"] == "completed", card["status_cause"]
    assert card["collisions"] == 0
    # it held the line: within a robot's half-width of the path all the way
    assert card["cross_track_max_m"] < sc.robot.footprint[1] / 2
