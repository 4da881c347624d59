"""Tracker registry, conformance of every registered tracker, construction errors."""

from __future__ import annotations

from importlib.metadata import EntryPoint

import numpy as np
import pytest

import planners.registry
from planners import se2
from planners.errors import RegistryError, ScenarioError
from planners.registry import Registry
from planners.trackers import TRACKERS, BodyCommand, Tracker, make_tracker
from planners.trackers.base import TrackerBase
from planners.trackers.checker import ConformanceError, check_tracker
from tests.planners.plan_fixtures import figure_eight_plan, line_plan

PLAN = figure_eight_plan()


@pytest.mark.parametrize("name", TRACKERS.names(), ids=TRACKERS.names())
def test_conformance(name):
    cls = TRACKERS.get(name)
    check_tracker(cls, PLAN)
    assert isinstance(cls(chassis=cls.CHASSIS[0], **cls.EXAMPLE_PARAMS), Tracker)


def test_builtin_names():
    assert set(TRACKERS.names()) >= {
        "pure-pursuit",
        "stanley",
        "unicycle",
        "lqr",
        "holonomic",
        "voltage-script",
    }
    assert TRACKERS.group == "skidpad.trackers"


def test_unknown_name_suggests():
    with pytest.raises(RegistryError, match="unknown tracker 'stanly'.*did you mean stanley"):
        make_tracker("stanly", chassis="skid")


def test_entry_point_discovery(monkeypatch):
    ep = EntryPoint(
        name="spiral", value="planners.trackers.unicycle:Unicycle", group="skidpad.trackers"
    )
    monkeypatch.setattr(
        planners.registry, "entry_points", lambda group: [ep] if group == "skidpad.trackers" else []
    )
    reg = Registry("tracker", "skidpad.trackers")
    assert reg.names() == ["spiral"]
    assert reg.get("spiral").__name__ == "Unicycle"


def test_chassis_is_checked():
    with pytest.raises(
        ScenarioError,
        match="tracker: kind 'holonomic' must drive one of mecanum, got chassis 'skid'",
    ):
        make_tracker("holonomic", chassis="skid")
    with pytest.raises(ScenarioError, match="did you mean differential"):
        make_tracker("lqr", chassis="diferential")


def test_params_are_checked():
    with pytest.raises(
        ScenarioError, match="tracker: lookahed must be one of .*did you mean lookahead"
    ):
        make_tracker("pure-pursuit", chassis="skid", lookahed=0.2)
    with pytest.raises(ScenarioError, match="tracker: lookahead must be > 0, got -0.1"):
        make_tracker("pure-pursuit", chassis="skid", lookahead=-0.1)
    with pytest.raises(ScenarioError, match="tracker: step must be given"):
        make_tracker("voltage-script", chassis="skid")


def test_defaults_from_params():
    tr = make_tracker("unicycle", chassis="differential")
    assert tr.params == {k: p.default for k, p in type(tr).PARAMS.items()}


class _Drifting(TrackerBase):
    """Breaks the contract: keeps memory across reset."""

    name = "drifting"
    ticks = 0

    def reset(self, plan, n):
        self.plan, self.n = plan, n

    def command(self, t, pose, velocity):
        type(self).ticks += 1
        v = np.full((self.n, 3), float(type(self).ticks))
        v[:, 1] = 0.0
        return BodyCommand(velocity=v, accel=np.zeros((self.n, 3)))


class _WrongShape(_Drifting):
    name = "wrong-shape"

    def command(self, t, pose, velocity):
        return BodyCommand(velocity=np.zeros((self.n, 2)), accel=np.zeros((self.n, 3)))


def test_checker_catches_broken_trackers():
    with pytest.raises(ConformanceError, match="a second run with the same seed"):
        check_tracker(_Drifting, PLAN)
    with pytest.raises(ConformanceError, match=r"velocity must have shape \(0, 3\)"):
        check_tracker(_WrongShape, PLAN)


def _script(**kw):
    steps = [{"until": 0.5, "duty": [0.2, -0.2]}, {"until": 1.0, "duty": [1.0, 0.5]}]
    return make_tracker("voltage-script", chassis="differential", step=kw.get("step", steps))


def test_voltage_script_steps():
    tr = _script()
    tr.reset(line_plan(), 3)
    z = np.zeros((3, 3))
    at = {t: tr.command(t, z, z) for t in (0.0, 0.495, 0.5, 0.995, 1.0, 5.0)}
    np.testing.assert_array_equal(at[0.0].duty, np.tile([0.2, -0.2], (3, 1)))
    np.testing.assert_array_equal(at[0.495].duty[0], [0.2, -0.2])
    np.testing.assert_array_equal(at[0.5].duty[0], [1.0, 0.5])
    np.testing.assert_array_equal(at[0.995].duty[0], [1.0, 0.5])
    np.testing.assert_array_equal(at[1.0].duty[0], [0.0, 0.0])
    np.testing.assert_array_equal(at[5.0].velocity, z)
    assert tr.wheels == 2 and at[0.0].target is None


@pytest.mark.parametrize(
    ("steps", "match"),
    [
        ([], "step must be one or more tables"),
        (
            [{"until": 1.0, "duty": [0.1]}, {"until": 1.0, "duty": [0.1]}],
            r"step\[1\]: until must be > 1",
        ),
        (
            [{"until": 1.0, "duty": [0.1, 0.2]}, {"until": 2.0, "duty": [0.1]}],
            r"step\[1\]: duty must have one value per wheel",
        ),
        ([{"until": 1.0, "duty": [1.5]}], r"step\[0\]: duty must be >= -1 and <= 1"),
        ([{"untill": 1.0, "duty": [0.5]}], r"step\[0\]: untill .*did you mean until"),
    ],
)
def test_voltage_script_errors(steps, match):
    with pytest.raises(ScenarioError, match=match):
        _script(step=steps)


def test_command_checks_batch_shape():
    tr = make_tracker("lqr", chassis="skid")
    tr.reset(PLAN, 2)
    with pytest.raises(ValueError, match=r"must have shape \(2, 3\)"):
        tr.command(0.0, np.zeros((3, 3)), np.zeros((3, 3)))


@pytest.mark.parametrize("name", ["pure-pursuit", "stanley", "unicycle", "lqr", "holonomic"])
def test_on_plan_the_command_is_the_plan(name):
    # started exactly on the plan, every tracker asks for the plan's speed and accel; the
    # timed ones for its turn rate too (path trackers steer on their own geometry)
    plan = figure_eight_plan(size=1.0, period=10.0)
    tracker = make_tracker(name, chassis="mecanum")
    tracker.reset(plan, 1)
    for k in range(400):
        cmd = tracker.command(k * plan.dt, plan.pose[k : k + 1], plan.velocity[k : k + 1])
        if k % 40 == 0:
            # path trackers: speed only, and their along-track feedback sees the polyline
            geometric = name in ("pure-pursuit", "stanley")
            checked = slice(0, 2) if geometric else slice(0, 3)
            np.testing.assert_allclose(
                cmd.velocity[0, checked],
                plan.velocity[k, checked],
                atol=2e-3 if geometric else 1e-4,
            )
            np.testing.assert_allclose(cmd.accel[0], plan.accel[k], atol=1e-9)


def test_holonomic_accel_is_the_derivative_of_its_command():
    # off the plan, on an ideal plant: the body accel returned equals the time derivative of
    # the body velocity commanded (central differences over the run)
    plan = figure_eight_plan(size=1.0, period=10.0, heading="hold", hold=0.3)
    tracker = make_tracker("holonomic", chassis="mecanum", bandwidth=3.0, heading_bandwidth=2.0)
    tracker.reset(plan, 1)
    pose = se2.compose(plan.pose[:1], np.array([[0.05, -0.08, 0.3]]))
    vel = plan.velocity[:1].copy()
    vs, accs = [], []
    for k in range(300):
        cmd = tracker.command(k * plan.dt, pose, vel)
        vs.append(cmd.velocity[0])
        accs.append(cmd.accel[0])
        vel = cmd.velocity
        pose = se2.compose(pose, se2.exp(vel * plan.dt))
    vs, accs = np.array(vs), np.array(accs)
    fd = (vs[2:] - vs[:-2]) / (2 * plan.dt)
    np.testing.assert_allclose(accs[1:-1], fd, atol=0.03 * np.max(np.abs(accs)))


def test_along_track_speed():
    from planners.trackers.base import AlongTrack

    plan = line_plan(speed=0.5, length=3.0)
    along = AlongTrack(plan, 2.0)
    k = 200  # plan at s = 0.5 m
    speed, direction = along.speed(k * plan.dt, np.array([0.5, 0.4, 0.6, 0.9]))
    # on time; behind (catch-up capped at the plan's top speed); ahead (slower); far ahead
    np.testing.assert_allclose(speed, [0.5, 0.5, 0.3, 0.0])
    assert direction == 1.0
    # past the end the plan stops; a robot short of the end creeps on to it
    speed, _ = along.speed(plan.duration + 1.0, np.array([plan.length - 0.01]))
    assert speed[0] == pytest.approx(0.02)
    back = AlongTrack(line_plan(speed=0.5, length=3.0, reverse=True), 1.0)
    assert back.speed(1.0, np.array([0.5]))[0][0] == pytest.approx(-0.5) and not back.strafing
    strafe = AlongTrack(figure_eight_plan(heading="hold", hold=2.5), 1.0)
    assert strafe.strafing and np.all(strafe.direction == 1.0)
