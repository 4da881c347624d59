"""Viewer scenes without pygame: tracks, geometry, the status figures, loading saved runs.

Also holds the synthetic runs the other viewer tests share: a hand-made plan along the south
aisle of the bundled workshop floor and a stand-in simulation that drives a known motion
through a real :class:`sim.trace.TraceRecorder` (the interface of ``sim.runner.Simulation``).
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest

from planners.errors import ScenarioError
from planners.plan import Plan
from sim.config_sensors import RangeSensor, SensorSuite
from sim.scenario import default_scenario_path, load_scenario
from sim.trace import TraceRecorder
from sim.viewer.scene import (
    body_to_field,
    covariance_ellipse,
    footprint_touches,
    outline,
    path_from_plan,
    wheel_layout,
)

DT = 0.01
Y0 = 1.2  # the aisle the test robot drives along [m]
X0, X1 = 0.8, 6.0


def aisle_plan(duration: float = 6.0) -> Plan:
    """A straight plan from (0.8, 1.2) to (6.0, 1.2): accelerate 1 s, cruise, decelerate 1 s."""
    t = np.arange(round(duration / DT) + 1) * DT
    v_top = (X1 - X0) / (duration - 1.0)
    v = v_top * np.clip(np.minimum(t, duration - t), 0.0, 1.0)
    s = np.concatenate([[0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * DT)])
    s *= (X1 - X0) / s[-1]
    n = len(t)
    pose = np.column_stack([X0 + s, np.full(n, Y0), np.zeros(n)])
    vel = np.column_stack([v, np.zeros(n), np.zeros(n)])
    acc = np.column_stack([np.gradient(v, DT), np.zeros(n), np.zeros(n)])
    ps = np.linspace(0.0, X1 - X0, 60)
    return Plan(dt=DT, t=t, pose=pose, velocity=vel, accel=acc, curvature=np.zeros(n), s=s,
                path_x=X0 + ps, path_y=np.full(60, Y0), path_s=ps, path_heading=np.zeros(60))


def aisle_scenario():
    """The bundled workshop scenario with a forward range sensor on the robot."""
    sc = load_scenario(default_scenario_path())
    sensors = SensorSuite(range=(RangeSensor(at=(0.2, 0.0), max_range=3.0, direction=math.pi / 2),))
    return dataclasses.replace(sc, sensors=sensors)


class StandInSimulation:
    """Drives each run along the aisle with a known wobble and records it (runner interface).

    Run k sits 3 cm further left; the estimate lags 2 cm behind; a fix arrives every 0.5 s.
    """

    def __init__(self, scenario, plan: Plan, runs=(0,), *, extra_ticks: int = 20) -> None:
        self.scenario, self.plan, self.dt = scenario, plan, DT
        self.runs = np.asarray(runs)
        n = len(self.runs)
        self.k = 0
        self.last = len(plan.t) + extra_ticks - 1
        self.active = np.ones(n, dtype=bool)
        self.end_tick = np.zeros(n, dtype=np.int64)
        self.status = ["running"] * n
        wheels = scenario.robot.wheel_count
        self.recorder = TraceRecorder(np.arange(n), self.runs, self.last + 1, wheels,
                                      meta={"scenario": scenario.title, "seed": 1, "dt": DT, "wheels": wheels})

    @property
    def t(self) -> float:
        return self.k * self.dt

    def truth(self, k: int) -> np.ndarray:
        t = k * DT
        ref, vel, _ = self.plan.sample(np.array([t]))
        y = Y0 + 0.03 * self.runs + 0.05 * math.sin(2.0 * t)
        heading = math.atan2(0.1 * math.cos(2.0 * t), max(vel[0, 0], 1e-3))
        return np.column_stack([np.full(len(self.runs), ref[0, 0]), y, np.full(len(self.runs), heading)])

    def step(self) -> bool:
        if not self.active.any():
            return False
        k, t, n = self.k, self.t, len(self.runs)
        w = self.scenario.robot.wheel_count
        pose = self.truth(k)
        ref, vel, _ = self.plan.sample(np.full(n, t))
        est = pose + np.array([-0.02, 0.0, 0.0])
        cov = np.tile(np.diag([0.01**2 + 1e-4 * t, 0.01**2, 1e-4]), (n, 1, 1))
        fix = np.full((n, 3), np.nan)
        if k % 50 == 0:
            fix = pose + np.array([0.01, -0.01, 0.0])
        self.recorder.record(
            k, t, pose=pose, velocity=vel, estimate=est, covariance=cov, reference=ref, command=vel,
            target=ref[:, :2] + np.array([0.3, 0.0]), duty=np.full((n, w), 0.4), wheel_speed=np.full((n, w), 10.0),
            wheel_target=np.full((n, w), 10.0), current=np.full((n, w), 4.0), slip=np.full((n, w), 0.1),
            battery=np.full(n, 12.6 - 0.05 * t), cross_track=pose[:, 1] - Y0, fix=fix,
        )
        if k >= self.last:
            self.active[:] = False
            self.end_tick[:] = k
            self.status = ["completed"] * n
        self.k += 1
        return bool(self.active.any())

    def run(self):
        while self.step():
            pass
        return self

    def trace(self):
        return self.recorder.finish(self.end_tick)


@pytest.fixture(scope="module")
def scenario():
    return aisle_scenario()


@pytest.fixture(scope="module")
def plan():
    return aisle_plan()


def test_path_speed_follows_the_plan(plan):
    xy, speed = path_from_plan(plan)
    assert xy.shape == (60, 2) and speed.shape == (60,)
    v_top = (X1 - X0) / 5.0
    assert speed[0] == pytest.approx(0.0, abs=1e-9)
    assert speed[30] == pytest.approx(v_top, rel=1e-6)  # the middle of the aisle is cruise
    assert speed[-1] == pytest.approx(0.0, abs=0.02)


def test_footprint_and_wheels_are_placed_by_the_pose(scenario):
    robot = scenario.robot
    corners = body_to_field(np.array([[1.0, 2.0, math.pi / 2]]), outline(robot))
    assert corners.shape == (1, 4, 2)
    # 45 cm square turned a quarter turn: rear-right corner (-L/2, -W/2) lands at (1 + W/2, 2 - L/2)
    np.testing.assert_allclose(corners[0, 0], [1.225, 1.775], atol=1e-12)
    wheels = wheel_layout(robot)  # mecanum FL, FR, RL, RR
    np.testing.assert_allclose(wheels, [[0.17, 0.19], [0.17, -0.19], [-0.17, 0.19], [-0.17, -0.19]])
    assert body_to_field(np.zeros((0, 3)), outline(robot)).shape == (0, 4, 2)


def test_ellipse_lies_on_the_chi_square_contour():
    cov = np.array([[0.04, 0.01], [0.01, 0.02]])
    pts = covariance_ellipse(np.array([1.0, 2.0]), cov, level=0.95)
    d = pts - [1.0, 2.0]
    m2 = np.einsum("ki,ij,kj->k", d, np.linalg.inv(cov), d)
    np.testing.assert_allclose(m2, -2.0 * math.log(0.05), rtol=1e-9)  # 5.991 for 2 dof


def test_contacts_flag_a_footprint_on_a_pillar(scenario):
    # pillar A spans x 1.85..2.15, y 2.35..2.65; the robot is 45 cm square
    poses = np.array([[1.0, 1.0, 0.0], [1.7, 2.5, 0.0], [0.1, 2.5, 0.0], [np.nan, 0.0, 0.0]])
    np.testing.assert_array_equal(footprint_touches(scenario.robot, scenario, poses), [False, True, True, False])


def test_track_clips_to_its_end_and_reports_status(scenario, plan):
    sim = StandInSimulation(scenario, plan, runs=[0, 1]).run()
    tr = sim.trace()
    from sim.viewer.scene import tracks_of

    tracks = tracks_of(tr, statuses=["completed", "timeout"])
    assert [t.run for t in tracks] == [0, 1]
    last = tr.end_tick(0)
    assert tracks[0].at(last + 50) == last
    assert tracks[0].status_at(last - 1) == "running" and tracks[1].status_at(last) == "timeout"
    worst = tracks[0].worst_tick()
    assert abs(tr["cross_track"][worst, 0]) == pytest.approx(np.abs(tr["cross_track"][:, 0]).max())


def test_status_figures_in_both_units(scenario, plan):
    from sim.viewer.panel import status_lines
    from sim.viewer.sources import scene_from_trace

    sim = StandInSimulation(scenario, plan).run()
    scene = scene_from_trace(sim.trace(), scenario, plan, statuses=["completed"])
    k = 300  # t = 3 s: cruise at 1.04 m/s, y = 1.2 + 0.05 sin(6)
    rows = {a: b for a, b, _ in status_lines(scene, k, units="m")}
    assert rows["time"] == "3.00 s"
    assert rows["speed"] == "1.04 m/s"
    assert rows["cross-track"] == f"{100 * 0.05 * math.sin(6.0):.1f} cm"
    assert rows["estimate error"] == "2.0 cm"
    assert rows["battery"] == "12.45 V"
    assert rows["status"] == "running"
    inch = {a: b for a, b, _ in status_lines(scene, k, units="in")}
    assert inch["estimate error"] == f"{0.02 / 0.0254:.2f} in"
    assert inch["speed"] == f"{1.04 / 0.0254:.1f} in/s"
    end = {a: (b, alert) for a, b, alert in status_lines(scene, 10_000, units="m")}
    assert end["status"] == ("completed", False)
    scene.chosen.status = "timeout"
    assert status_lines(scene, 10_000)[-1] == ("status", "timeout", True)


def _save_run(folder, scenario, plan, runs=(0,)):
    from sim.commands.run import write_resolved

    folder.mkdir(parents=True, exist_ok=True)
    sim = StandInSimulation(scenario, plan, runs=runs).run()
    sim.trace().save(folder / "trace.npz")
    write_resolved(scenario, scenario.run.seed, folder)
    (folder / "scorecard.json").write_text(json.dumps({"status": "completed"}))
    return sim


def test_run_folder_replays_with_its_scenario_and_status(tmp_path, scenario, plan):
    from sim.viewer.sources import load_replay

    _save_run(tmp_path / "run", scenario, plan)
    for target in (tmp_path / "run", tmp_path / "run" / "trace.npz"):
        scene = load_replay(target)
        assert scene.scenario.title == scenario.title
        assert len(scene.tracks) == 1 and scene.chosen.status == "completed"
        assert scene.dt == DT and scene.ticks() == len(plan.t) + 20


def test_batch_folder_replays_every_run(tmp_path, scenario, plan):
    from sim.commands.run import write_resolved
    from sim.viewer.sources import load_replay

    batch = tmp_path / "batch"
    (batch / "traces").mkdir(parents=True)
    (batch / "scenarios").mkdir()
    for k in range(3):
        StandInSimulation(scenario, plan, runs=[k]).run().trace().save(batch / "traces" / f"run{k}.npz")
    write_resolved(scenario, 1, batch / "scenarios", name="workshop-loop.toml")
    (batch / "results.csv").write_text("scenario,run,seed,status\nworkshop-loop,0,1,completed\n"
                                       "workshop-loop,1,1,collided\nworkshop-loop,2,1,completed\n")
    scene = load_replay(batch, highlight_run=1)
    assert [t.run for t in scene.tracks] == [0, 1, 2]
    assert scene.highlight == 1 and scene.chosen.status == "collided"
    with pytest.raises(ScenarioError, match=r"--run must be one of the recorded runs \[0, 1, 2\], got 7"):
        load_replay(batch, highlight_run=7)
    write_resolved(dataclasses.replace(scenario, title="other cart"), 1, batch / "scenarios", name="other.toml")
    with pytest.raises(ScenarioError, match=r"holds runs of 2 scenarios; choose one with --scenario NAME"):
        load_replay(batch)
    with pytest.raises(ScenarioError, match=r"--scenario must be one of \['other', 'workshop-loop'\], got 'workshop'"):
        load_replay(batch, scenario="workshop")
    assert len(load_replay(batch, scenario="workshop-loop").tracks) == 3


def test_replay_needs_traces_and_a_scenario(tmp_path, scenario, plan):
    from sim.viewer.sources import load_replay

    with pytest.raises(ScenarioError, match="must hold trace .npz files"):
        load_replay(tmp_path)
    StandInSimulation(scenario, plan).run().trace().save(tmp_path / "lone.npz")
    with pytest.raises(ScenarioError, match="needs the scenario .toml beside its traces"):
        load_replay(tmp_path / "lone.npz")
    with pytest.raises(ScenarioError, match="no such file or folder"):
        load_replay(tmp_path / "missing")
