"""The run loop: scenario -> plan -> per tick (sensors -> estimator -> tracker -> wheel
control -> world) -> scorecards and traces, for N robots of one scenario at once.

Run ``k`` of a scenario with base seed ``s`` draws every random number from streams keyed by
``(s, k)`` (:func:`run_streams`), and every per-robot computation works row by row, so run
``k`` is bit-identical alone, inside a batch of any size and under any executor.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numba import njit

from planners.control import WheelController, feedforward_from_motor
from planners.estimators import ESTIMATORS
from planners.odometry import Odometry
from planners.odometry_geometry import assumed_forward_matrix
from planners.plan import Plan
from sim.planning import geometry, make_plan
from planners.se2 import wrap_one
from planners.trackers import TRACKERS
from sim.scenario import Scenario, robot_value
from sim.scoring import ScoreKeeper
from sim.sensors import Sensors
from sim.trace import Trace, TraceRecorder
from sim.world import World

#: end-of-run codes of :func:`_judge_kernel`
_RUNNING, _DIVERGED, _COLLIDED, _DONE, _LATE = range(5)
_STATUS = ("running", "diverged", "collided", "completed", "timeout")


@njit(cache=True)
def _judge_kernel(active, status, body, limits, finish, at_goal, late, codes):
    """Which active runs end this tick and why (``codes``, see ``_STATUS``); returns the count.

    A run ends when its physics diverged, when it touched a wall (with collision "stop"),
    once ``finish`` (plan or script over) and, when ``at_goal``, it is at the end pose within
    the tolerances and settled; else when ``late`` (the timeout is reached). ``limits`` holds
    the end pose (3), the position, heading and speed tolerances and 1 for collision "stop";
    ``status`` the World's (2, N) contact counts and diverged flags, ``body`` its (2, N, 3) pose
    and velocity.
    """
    contacts, diverged = status[0], status[1]
    pose, vel = body[0], body[1]
    goal = limits[:3]
    goal_tol, heading_tol, settle_speed = limits[3], limits[4], limits[5]
    collision_stop = limits[6] != 0.0
    ended = 0
    for i in range(active.shape[0]):
        codes[i] = _RUNNING
        if not active[i]:
            continue
        if diverged[i] != 0.0:
            codes[i] = _DIVERGED
        elif collision_stop and contacts[i] > 0:
            codes[i] = _COLLIDED
        elif finish and (not at_goal or (
            math.hypot(pose[i, 0] - goal[0], pose[i, 1] - goal[1]) <= goal_tol
            and abs(wrap_one(pose[i, 2] - goal[2])) <= heading_tol
            and math.hypot(vel[i, 0], vel[i, 1]) <= settle_speed
            and abs(vel[i, 2]) <= 0.1
        )):
            codes[i] = _DONE
        elif late:
            codes[i] = _LATE
        if codes[i] != _RUNNING:
            ended += 1
    return ended


@njit(cache=True)
def _encoder_motion_kernel(counts, prev, count_to_speed, forward, speed, twist):
    """From one tick of encoder counts: wheel speeds (counts - previous) * 2 pi / (cpr dt) and
    their body twist (row by row, as planners.kinematics); the counts become the previous
    ones."""
    n, w = counts.shape
    for i in range(n):
        for j in range(w):
            speed[i, j] = (counts[i, j] - prev[i, j]) * count_to_speed
            prev[i, j] = counts[i, j]
        for a in range(3):
            acc = 0.0
            for j in range(w):
                acc += speed[i, j] * forward[a, j]
            twist[i, a] = acc


#: stream numbers inside one run's SeedSequence
_VARY, _SENSORS, _ESTIMATOR = 0, 1, 2


def run_streams(seed: int, k: int) -> list[np.random.SeedSequence]:
    """The independent random streams of run ``k`` of base seed ``seed``."""
    return np.random.SeedSequence(entropy=seed, spawn_key=(k,)).spawn(3)


def robot_parameters(scenario: Scenario, runs: Sequence[int]) -> dict[str, np.ndarray]:
    """Per-run values of the ``[run.vary]`` keys, shape (N,) each, drawn from each run's stream."""
    out: dict[str, list[float]] = {v.key: [] for v in scenario.run.vary}
    for k in runs:
        rng = np.random.default_rng(run_streams(scenario.run.seed, k)[_VARY])
        for v in scenario.run.vary:
            out[v.key].append(v.draw(float(robot_value(scenario.robot, v.key)), float(rng.random())))
    return {key: np.array(vals) for key, vals in out.items()}


@dataclass
class RunResult:
    """The outcome of one run: its index, scorecard and (when kept) trace column."""

    run: int
    scorecard: dict


class Simulation:
    """N runs of one scenario, stepped together in one World.

    Parameters
    ----------
    scenario : Scenario
    runs : sequence of int — run indices k (one robot each)
    keep : sequence of int — run indices whose full trace is recorded
    plan : Plan, optional — reuse a plan already made for this scenario
    """

    def __init__(
        self,
        scenario: Scenario,
        runs: Sequence[int] = (0,),
        *,
        keep: Sequence[int] = (),
        plan: Plan | None = None,
    ) -> None:
        self.scenario = sc = scenario
        self.runs = np.asarray(list(runs), dtype=np.int64)
        n = self.n = len(self.runs)
        robot = sc.robot
        self.plan = plan if plan is not None else make_plan(sc)
        self.dt = 1.0 / sc.run.rate
        self.geom = geometry(robot)
        self.params = robot_parameters(sc, self.runs)
        pose0 = np.tile(np.asarray(sc.route.start, dtype=np.float64), (n, 1))
        self.world = World(robot, n, field=sc.field, params=self.params, substep=sc.run.substep, pose0=pose0)
        streams = [run_streams(sc.run.seed, int(k)) for k in self.runs]
        self.sensors = Sensors(sc.sensors, field=sc.field, wheel_count=robot.wheel_count, dt=self.dt)
        self.sensors.reset([np.random.default_rng(s[_SENSORS]) for s in streams], pose0)
        self.estimator = ESTIMATORS.get(sc.estimator.kind)(
            geometry=self.geom, sensors=sc.sensors, field=sc.field, dt=self.dt, **sc.estimator.params
        )
        self._needs_truth = getattr(self.estimator, "NEEDS_TRUTH", False)
        self.estimator.reset(pose0, n, rngs=[np.random.default_rng(s[_ESTIMATOR]) for s in streams])
        # the scorecard's encoder dead reckoning, with the geometry the odometry assumes
        self.odometry: Odometry | None = None
        self.odometry_pose = None
        if sc.sensors.encoders is not None:
            enc = sc.sensors.encoders
            self.odometry = Odometry(
                source="encoders", counts_per_rev=enc.counts_per_rev,
                forward=assumed_forward_matrix(self.geom, radius_scale=enc.radius_scale, track_scale=enc.track_scale),
            )
            self.odometry.reset(pose0)
            self.odometry_pose = pose0.copy()
        self.tracker = TRACKERS.get(sc.tracker.kind)(chassis=robot.chassis, **sc.tracker.params)
        self.tracker.reset(self.plan, n)
        m = robot.motor
        ff = feedforward_from_motor(
            free_speed=m.free_speed, stall_torque=m.stall_torque, stall_current=m.stall_current,
            free_current=m.free_current, voltage=m.nominal_voltage or robot.battery.voltage,
            gear_ratio=robot.gear_ratio, gear_efficiency=robot.gear_efficiency,
            mass_share=robot.mass / robot.wheel_count, wheel_radius=robot.wheel_radius,
            wheel_inertia=robot.wheel_inertia, rotor_inertia=m.rotor_inertia, wheels=robot.wheel_count,
        )
        self.wheels = WheelController(
            wheels=robot.wheel_count, dt=self.dt, voltage=robot.battery.voltage, motor=ff, **sc.control
        )
        self.wheels.reset(n)
        until = getattr(self.tracker, "until", None)
        self.script_end = float(until[-1]) if until is not None else None
        self.plan_duration = self.plan.duration
        self.timeout = sc.run.timeout_for(self.plan_duration)
        if self.script_end is not None and sc.run.timeout is None:
            self.timeout = max(self.timeout, self.script_end + 1.0)
        self.max_ticks = int(math.ceil(self.timeout / self.dt)) + 1
        self.score = ScoreKeeper(self.plan, n, self.max_ticks)
        keep_cols = [i for i, k in enumerate(self.runs) if int(k) in set(int(x) for x in keep)]
        self.recorder = TraceRecorder(
            np.array(keep_cols, dtype=np.int64), self.runs[keep_cols], self.max_ticks, robot.wheel_count,
            meta={"scenario": sc.title, "seed": sc.run.seed, "dt": self.dt, "wheels": robot.wheel_count},
        )
        self.k = 0
        self.status = ["running"] * n
        self.cause = [""] * n
        self.status_time = np.zeros(n)
        self.end_tick = np.zeros(n, dtype=np.int64)
        self.active = np.ones(n, dtype=bool)
        self.n_active = n
        self._codes = np.zeros(n, dtype=np.int64)
        self._status = self.world.status_rows()
        self._body = self.world.body
        self._inverse = np.ascontiguousarray(self.geom.inverse_matrix)
        self._forward = np.ascontiguousarray(self.geom.forward_matrix)
        r = sc.run
        self._limits = np.array([
            *self.plan.final_pose[0], r.goal_tolerance, r.heading_tolerance, r.settle_speed,
            1.0 if r.collision == "stop" else 0.0,
        ])
        self._count_to_speed = (
            2.0 * math.pi / (sc.sensors.encoders.counts_per_rev * self.dt) if sc.sensors.encoders is not None else 0.0
        )
        self.estimate = pose0.copy()
        self.covariance: np.ndarray | None = None
        self.command = None
        self.final_estimate = pose0.copy()
        self.final_true = pose0.copy()
        self.final_odometry = pose0.copy()
        self._prev_counts: np.ndarray | None = None
        self.notes = list(sc.notes) + list(self.world.notes)

    @property
    def t(self) -> float:
        """Time of the current tick [s] (exactly k * dt)."""
        return self.k * self.dt

    def _measured_motion(self, readings) -> tuple[np.ndarray, np.ndarray]:
        """Wheel speeds from the encoder counts of the last tick (N, W) and the body twist
        they imply by the forward kinematics (N, 3); the true wheel speeds without encoders."""
        counts = readings.encoder_counts
        if counts is None:
            speed = self.world.wheel_speed.copy()
            return speed, self.geom.forward(speed)
        if self._prev_counts is None:
            self._prev_counts = counts.copy()
        speed = np.empty(counts.shape)
        twist = np.empty((counts.shape[0], 3))
        _encoder_motion_kernel(counts, self._prev_counts, self._count_to_speed, self._forward, speed, twist)
        self.odometry_pose = self.odometry.update(readings, copy=False)
        return speed, twist

    def step(self) -> bool:
        """Advance every active robot by one control tick; False once every run has ended."""
        if self.n_active == 0:
            return False
        t = self.k * self.dt
        w = self.world
        readings = self.sensors.read(t, w.pose, w.wheel_angle)
        readings.battery_voltage = w.battery_voltage.copy()
        self.readings = readings
        if self._needs_truth:
            readings.truth = w.pose.copy()
        measured, moving = self._measured_motion(readings)
        self.estimate = self.estimator.update(t, readings)
        self.covariance = getattr(self.estimator, "covariance", None)
        cmd = self.tracker.command(t, self.estimate, moving)
        self.command = cmd
        if cmd.duty is not None:
            duty = self.geom.expand_duty(cmd.duty).copy()
            target = np.full_like(measured, np.nan)
        else:
            duty, target = self.wheels.duty_from_twist(
                cmd.velocity, cmd.accel, self._inverse, measured, w.battery_voltage
            )
        if self.n_active < self.n:
            duty[~self.active] = 0.0
        self.duty = duty
        self.score.update(
            self.k, t, self.active, w.pose, self.estimate, self.covariance, duty, w.motor_current, w.battery_voltage
        )
        if self.recorder.columns.size:
            self.recorder.record(
                self.k, t, pose=w.pose, velocity=w.velocity, estimate=self.estimate, covariance=self.covariance,
                reference=self.plan.pose[min(self.k, len(self.plan.t) - 1)][None, :].repeat(self.n, axis=0),
                command=cmd.velocity, target=cmd.target, duty=duty, wheel_speed=w.wheel_speed,
                wheel_target=target, current=w.motor_current, slip=w.slip, battery=w.battery_voltage,
                cross_track=self.score.cross_track,
                fix=readings.fix_if_new() if hasattr(readings, "fix_if_new") else None,
            )
        self._judge(t, cmd)
        w.advance(duty, self.dt)
        self.k += 1
        return self.n_active > 0

    def _end(self, i: int, status: str, t: float, cause: str) -> None:
        self.status[i] = status
        self.cause[i] = cause
        self.status_time[i] = t
        self.end_tick[i] = self.k
        self.active[i] = False
        self.n_active -= 1
        self.final_estimate[i] = self.estimate[i]
        self.final_true[i] = self.world.pose[i]
        if self.odometry_pose is not None:
            self.final_odometry[i] = self.odometry_pose[i]

    def _judge(self, t: float, cmd) -> None:
        script = cmd.duty is not None
        if script:
            finish = self.script_end is not None and t >= self.script_end
        else:
            finish = t >= self.plan_duration
        codes = self._codes
        ended = _judge_kernel(
            self.active, self._status, self._body, self._limits, finish, not script,
            t + self.dt > self.timeout + 1e-12, codes,
        )
        if not ended:
            return
        causes = (
            "", "non-finite state in the physics", "touched a wall or obstacle",
            "voltage script finished" if script else "reached the end pose and settled",
            f"not settled at the end pose after {self.timeout:g} s",
        )
        for code in (_DIVERGED, _COLLIDED, _DONE, _LATE):
            for i in np.flatnonzero(codes == code):
                self._end(i, _STATUS[code], t, causes[code])

    def run(self) -> list[RunResult]:
        """Step until every run has ended; return one result per run."""
        while self.step():
            pass
        return self.results()

    def results(self) -> list[RunResult]:
        """Scorecards of every run (call after the runs have ended)."""
        w = self.world
        odo = self.final_odometry if self.odometry_pose is not None else None
        cards = self.score.scorecards(
            status=self.status, status_time=self.status_time, cause=self.cause,
            final_true=self.final_true, final_estimate=self.final_estimate, collisions=w.contact_count,
            penetration=w.peak_penetration, slip_energy=w.slip_energy, odometry_final=odo,
        )
        return [RunResult(run=int(k), scorecard=c) for k, c in zip(self.runs, cards)]

    def trace(self) -> Trace:
        """The recorded trace of the kept runs."""
        return self.recorder.finish(self.end_tick)
