"""The drift stress test: per-source figures, outputs, and slip seen by encoders but not pods."""

from __future__ import annotations

import csv

import numpy as np

from sim.cli import main
from sim.drift import drift_test, odometry_sources
from sim.runner import Simulation
from sim.scenario import load_scenario

PODS = (
    "sensors.pods=[{at=[0.0, 0.15], radius=0.024, counts_per_rev=8192},"
    " {at=[0.0, -0.15], radius=0.024, counts_per_rev=8192},"
    " {at=[-0.15, 0.0], direction=1.5707963267948966, radius=0.024, counts_per_rev=8192}]"
)


def test_drift_command_writes_csv_and_plot(tmp_path, capsys):
    out = tmp_path / "drift"
    args = ["drift", "scenarios/greenhouse-drift.toml", "--runs", "3", "--out", str(out),
            "--set", "route.waypoint=[{at=[4.0, 0.7]}, {at=[6.5, 0.7]}]"]
    assert main(args) == 0
    with open(out / "drift.csv") as f:
        rows = list(csv.DictReader(f))
    assert [r["source"] for r in rows] == ["encoders", "encoders+imu", "pods", "pods+imu"]
    for key in ("position_error_pct_mean", "position_error_pct_p95", "heading_drift_deg_per_min_mean"):
        assert all(float(r[key]) >= 0 for r in rows)
    assert (out / "drift.png").stat().st_size > 10_000


def test_hard_launch_on_ice_fools_encoders_not_pods():
    # A wheel spinning on a slippery floor turns more than the robot travels: encoder odometry
    # over-estimates the distance; unpowered pods roll with the floor and do not.
    sc = load_scenario(
        "scenarios/long-straight-skid.toml",
        [PODS, 'robot.traction.mu=0.25', 'route.max_accel="6 m/s^2"', 'run.timeout="20 s"'],
    )
    sim = Simulation(sc, runs=[0])
    sources = odometry_sources(sim)
    for odo in sources.values():
        odo.reset(sim.world.pose.copy())
    x0 = sim.world.pose[0, 0]
    while sim.step():
        for odo in sources.values():
            odo.update(sim.readings)
        if sim.world.pose[0, 0] - x0 > 3.0:
            break
    truth = sim.world.pose[0, 0] - x0
    enc = sources["encoders"].pose[0, 0] - x0
    pods = sources["pods"].pose[0, 0] - x0
    assert enc > truth * 1.02
    assert abs(pods - truth) < 0.005 * truth


def test_drift_result_shapes():
    sc = load_scenario("scenarios/greenhouse-drift.toml", ["route.waypoint=[{at=[3.0, 0.7]}]"])
    res = drift_test(sc, 2)
    bins, err = res["growth"]["pods+imu"]
    assert err.shape[0] == 2 and bins.shape[0] == err.shape[1]
    assert np.all(res["distance_m"] > 1.5)
