"""The run loop: determinism, batch equivalence, statuses, outputs of `skidpad run`."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from sim.cli import main
from sim.scenario import bundled_scenarios, load_scenario
from sim.runner import Simulation
from sim.trace import Trace

SHORT = [
    "route.waypoint=[{at=[2.0, 1.0]}, {at=[3.0, 1.6]}]",
    "route.start=[0.8, 0.8, 0.0]",
    'run.rate="100 Hz"',
]


def _short(*extra: str):
    return load_scenario("scenarios/workshop-loop.toml", [*SHORT, *extra])


def test_run_k_alone_equals_run_k_in_a_batch():
    sc = _short('run.vary={mass="8 %", "traction.mu"=[0.6, 0.9]}', 'sensors.encoders.noise=0.5')
    batch = Simulation(sc, runs=[0, 1, 2, 3]).run()
    for k in (1, 3):
        alone = Simulation(sc, runs=[k]).run()[0]
        assert alone.scorecard == batch[k].scorecard
    assert batch[0].scorecard != batch[1].scorecard  # the runs do differ
    again = Simulation(sc, runs=[0, 1, 2, 3]).run()
    assert [r.scorecard for r in again] == [r.scorecard for r in batch]


def test_short_route_completes_with_small_errors():
    res = Simulation(_short(), runs=[0]).run()[0].scorecard
    assert res["status"] == "completed"
    assert res["cross_track_max_m"] < 0.02
    assert res["end_position_error_m"] < 0.03
    assert res["estimate_error_rms_m"] == 0.0  # truth estimator
    assert res["distance_travelled_m"] == pytest.approx(2.5, rel=0.15)


def test_diverged_robot_is_marked_and_others_go_on():
    sim = Simulation(_short(), runs=[0, 1])
    sim.world.velocity[0] = np.nan  # a non-finite state, caught by the kernel in the first tick
    res = sim.run()
    assert res[0].scorecard["status"] == "diverged"
    assert res[0].scorecard["status_time_s"] == pytest.approx(sim.dt)
    assert res[1].scorecard["status"] == "completed"


def test_collision_stop():
    # a route whose start faces a wall one robot-length away, driven open loop into it
    sc = load_scenario("scenarios/characterise-skid.toml", ["run.collision=\"stop\"", "route.start=[0.5, 3.0, 3.1416]"])
    res = Simulation(sc, runs=[0]).run()[0].scorecard
    assert res["status"] == "collided"
    assert res["collisions"] >= 1


def test_voltage_script_run_writes_csv(tmp_path, capsys):
    out = tmp_path / "char"
    assert main(["run", "scenarios/characterise-skid.toml", "--out", str(out), "--csv", "--no-plot"]) == 0
    card = json.loads((out / "scorecard.json").read_text())
    assert card["status"] == "completed" and card["status_time_s"] == pytest.approx(6.0)
    with open(out / "trace.csv") as f:
        header = next(csv.reader(f))
    assert header[:7] == ["t", "x", "y", "heading", "vx", "vy", "omega"]
    trace = Trace.load(out / "trace.npz")
    assert trace["duty"].shape[2] == 4
    np.testing.assert_allclose(trace["duty"][10, 0], [0.1] * 4)
    assert card["final_pose_true"][0] > 1.0  # it drove forward


def test_run_writes_outputs_and_repeats_exactly(tmp_path, capsys):
    out = tmp_path / "a"
    args = ["run", "scenarios/workshop-loop.toml", "--out", str(out), "--seed", "5", "--run", "2"]
    for s in SHORT:
        args += ["--set", s]
    assert main(args) == 0
    for name in ("scorecard.json", "trace.npz", "scenario.toml", "plot.png"):
        assert (out / name).is_file()
    card = json.loads((out / "scorecard.json").read_text())
    assert card["seed"] == 5 and card["run"] == 2
    # the resolved scenario repeats the run exactly
    again = tmp_path / "b"
    assert main(["run", str(out / "scenario.toml"), "--out", str(again), "--run", "2", "--no-plot"]) == 0
    assert json.loads((again / "scorecard.json").read_text()) == card
    assert "completed" in capsys.readouterr().out


@pytest.mark.parametrize("path", bundled_scenarios(), ids=lambda p: p.stem)
def test_bundled_scenarios_complete(path):
    res = Simulation(load_scenario(path), runs=[0]).run()[0].scorecard
    assert res["status"] == "completed", res["status_cause"]
    assert res["collisions"] == 0
