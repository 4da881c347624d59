"""Log replay: a simulated run's log, replayed through the same estimator, gives the same
estimate the simulator computed (equivalence check), and the command reports it."""

from __future__ import annotations

import json

import numpy as np
import pytest

from planners.robot_log import read_log
from sim.cli import main
from sim.log_recorder import run_logged
from sim.replay import replay
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario

GREENHOUSE = bundled_dir("scenarios") / "greenhouse-drift.toml"
WORKSHOP = bundled_dir("scenarios") / "workshop-loop.toml"


@pytest.fixture(scope="module")
def ekf_run(tmp_path_factory):
    """The greenhouse lap under an EKF on pods + gyro + delayed camera fixes, logged."""
    sc = load_scenario(GREENHOUSE, ["estimator.kind=ekf", "estimator.source=pods+imu"])
    sim = Simulation(sc, runs=[0], keep=[0])
    path = run_logged(sim).write(tmp_path_factory.mktemp("replay") / "lap.csv")
    return sc, sim.trace(), path


def test_replay_repeats_the_simulators_estimate(ekf_run):
    sc, trace, path = ekf_run
    log = read_log(path)
    result = replay(log, "ekf", scenario=sc)
    est = trace["estimate"][: trace.end_tick(0) + 1, 0]
    assert result.estimate.shape == est.shape
    # the log rounds readings to 9 significant digits; nothing else differs
    np.testing.assert_allclose(result.estimate, est, atol=1e-5)
    truth = trace["pose"][: trace.end_tick(0) + 1, 0]
    np.testing.assert_allclose(result.truth, truth, atol=1e-8)


def test_fixes_pull_the_estimate_back(ekf_run):
    sc, _, path = ekf_run
    log = read_log(path)
    with_fixes = replay(log, "ekf", scenario=sc).compare()["truth"]
    dead_reckoning = replay(log, "odometry", scenario=sc).compare()["truth"]
    assert with_fixes["position_rms"] < 0.5 * dead_reckoning["position_rms"]


def test_command_from_metadata_alone(tmp_path, capsys):
    # a mecanum run logged with encoders and a gyro; geometry from the log's metadata
    sc = load_scenario(WORKSHOP)
    path = run_logged(Simulation(sc, runs=[0])).write(tmp_path / "loop.csv")
    assert main(["replay", str(path), "--estimator", "odometry", "--out", str(tmp_path / "out"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["estimator"] == "odometry"
    # mecanum encoders on a grippy floor: centimetres over a 15 m loop
    assert doc["truth"]["final_position"] < 0.05
    assert doc["truth"]["position_rms"] < 0.05
    assert (tmp_path / "out" / "replay.png").stat().st_size > 0
    rows = np.loadtxt(tmp_path / "out" / "replay.csv", delimiter=",", skiprows=1)
    assert rows.shape[1] == 4


def test_missing_geometry_is_one_line_error(tmp_path, capsys):
    path = tmp_path / "bare.csv"
    path.write_text("t [s], position_left [rad], position_right [rad]\n0, 0, 0\n0.01, 0.1, 0.1\n")
    assert main(["replay", str(path), "--estimator", "odometry"]) == 2
    err = capsys.readouterr().err.strip()
    assert err == f"skidpad replay: {path}: replay needs the metadata line '# wheel_radius = ...' or --scenario"


def test_unknown_estimator_suggests(tmp_path, capsys):
    sc = load_scenario(WORKSHOP, ["route.max_speed=0.3m/s"])
    path = run_logged(Simulation(sc, runs=[0])).write(tmp_path / "loop.csv")
    assert main(["replay", str(path), "--estimator", "ekff"]) == 2
    assert "ekf" in capsys.readouterr().err


def _drive(tmp_path, name, columns):
    """A differential cart's log (r = 5 cm, track 40 cm): left wheel phi = 4 t + 0.5 t^2, right
    phi = 5 t + 0.8 t^2 [rad] over 3 s at 100 Hz, with a gyro."""
    from planners.log_writer import write_log

    t = np.arange(301) * 0.01
    cols = {"yaw_rate": ("rad/s", np.full_like(t, 0.01))}
    for side, (a, b) in (("left", (4.0, 0.5)), ("right", (5.0, 0.8))):
        if "position" in columns:
            cols[f"position_{side}"] = ("rad", a * t + b * t**2)
        if "velocity" in columns:
            cols[f"velocity_{side}"] = ("rpm", (a + 2 * b * t) * 60 / (2 * np.pi))
    return write_log(tmp_path / name, t, cols, meta={"wheel_radius": 0.05, "track": 0.4})


def test_a_log_of_wheel_speeds_replays_like_the_same_log_of_positions(tmp_path):
    """The speeds are linear in t, so their trapezoid integral is the logged position exactly."""
    by_position = replay(read_log(_drive(tmp_path, "p.csv", ("position",))), "odometry")
    by_speed = replay(read_log(_drive(tmp_path, "v.csv", ("velocity",))), "odometry")
    # it went somewhere: 0.97 m of arc turning 0.71 rad left (wheel travel 0.825 m and 1.11 m)
    assert by_speed.estimate[-1, 0] > 0.8 and by_speed.estimate[-1, 2] == pytest.approx(0.7125, abs=1e-6)
    # the log rounds rpm to 9 significant digits
    np.testing.assert_allclose(by_speed.estimate, by_position.estimate, atol=1e-7)


def test_command_replays_a_speed_only_log_through_the_ekf(tmp_path, capsys):
    path = _drive(tmp_path, "v.csv", ("velocity",))
    assert main(["replay", str(path), "--estimator", "ekf", "--out", str(tmp_path / "out")]) == 0
    assert "replayed 301 rows" in capsys.readouterr().out


def test_a_sensor_the_log_lacks_is_named_in_log_terms(tmp_path, capsys):
    from planners.log_writer import write_log

    t = np.arange(50) * 0.01
    path = write_log(tmp_path / "gyro.csv", t, {"yaw_rate": ("rad/s", np.zeros_like(t))},
                     meta={"wheel_radius": 0.05, "track": 0.4})
    assert main(["replay", str(path), "--estimator", "ekf"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert err[0] == (
        f"skidpad replay: {path}: line 3 (header): estimator 'ekf' with source 'encoders' needs wheel "
        "columns 'position_<w>' or 'velocity_<w>' for every wheel (w = left, right per side, or fl, fr, rl, "
        "rr); the log has t, yaw_rate (log format: planners/robot_log.py)"
    )
