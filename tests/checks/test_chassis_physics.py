"""Chassis physics against hand derivations, DC-motor relations and published results."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from planners.kinematics import ChassisGeometry
from sim.config_robot import Traction
from sim.motors import motor_constants
from sim.physics import G0
from sim.traction import saturate
from sim.world import World
from tests.sim.robots import robot

DT = 0.005


def drive(world: World, duty, seconds: float, every=None):
    d = np.atleast_2d(np.asarray(duty, dtype=float))
    d = np.repeat(d, world.n, axis=0) if d.shape[0] == 1 else d
    for k in range(int(round(seconds / DT))):
        world.advance(d, DT)
        if every is not None:
            every(k, world)


def test_dc_motor_relations():
    # Hughes & Drury, Electric Motors and Drives (2013), ch. 3: V = R I + ke w, tau = kt I:
    # the torque-speed line runs from stall torque at w = 0 to zero at free speed, the current
    # from stall current to free current, and output power peaks at half the free speed.
    r = robot()
    k = motor_constants(r.motor, 12.6)
    assert k.R == pytest.approx(12.6 / 22.0)  # stall current = V / R
    assert k.torque(12.6, 0.0) == pytest.approx(0.42)
    assert k.torque(12.6, r.motor.free_speed) == pytest.approx(0.0, abs=1e-12)
    assert k.current(12.6, r.motor.free_speed) == pytest.approx(1.4)
    speeds = np.linspace(0, r.motor.free_speed, 2001)
    power = np.array([k.torque(12.6, w) * w for w in speeds])
    assert speeds[np.argmax(power)] == pytest.approx(r.motor.free_speed / 2, rel=1e-3)
    # worked example (hand calculation from the figures above): kt = 0.42 / (22 - 1.4)
    # = 0.020388 N m/A; R = 0.5727 ohm; ke = (12.6 - 0.5727 * 1.4) / 607.37 = 0.019425 V s/rad
    assert k.kt == pytest.approx(0.020388, rel=1e-4)
    assert k.ke == pytest.approx(0.019425, rel=1e-4)


@pytest.mark.parametrize("chassis", ["skid", "differential"])
def test_terminal_speed_matches_derivation(chassis):
    # Steady state at full duty (derivation, common practice): the body force balance makes
    # each wheel's grip force equal its rolling resistance, F = crr N; the wheel torque balance
    # eta G (kt I - tau_f) = r F gives the current I; the battery sags to Vb = V0 - Rb W I; the
    # motor turns at (Vb - R I) / ke; the body moves at the rim speed less the slip that carries
    # F: crr N = mu N sat(s / vs), sat the smooth sign of sim.traction.saturate.
    r = robot(chassis)
    world = World(r, 1)
    drive(world, np.ones(r.wheel_count), 8.0)
    k = motor_constants(r.motor, r.battery.voltage)
    w = r.wheel_count
    load = r.mass * G0 / w
    crr, mu, vs = r.traction.rolling_resistance, r.traction.mu, r.traction.slip_speed
    tau_wheel = r.wheel_radius * crr * load
    current = (tau_wheel / (r.gear_efficiency * r.gear_ratio) + k.tau_f) / k.kt
    vb = r.battery.voltage - r.battery.resistance * w * current
    wm = (vb - k.R * current) / k.ke
    slip = brentq(lambda x: saturate(x)[0] - crr / mu, 0.0, 3.0) * vs
    v = r.wheel_radius * wm / r.gear_ratio - slip
    assert world.velocity[0, 0] == pytest.approx(v, rel=0.03)
    assert world.battery_voltage[0] == pytest.approx(vb, rel=0.01)


def test_low_friction_caps_acceleration_at_mu_g():
    # Coulomb friction: no floor can push a robot harder than mu m g (common practice, no source).
    r = robot("skid", mu=0.3)
    world = World(r, 1)
    v = []
    drive(world, np.ones(4), 1.0, every=lambda k, w: v.append(w.velocity[0, 0]))
    accel = np.diff(v) / DT
    assert accel.max() <= 0.3 * G0 * 1.01
    assert accel.max() > 0.3 * G0 * 0.9  # and it does slip-limit


def test_high_friction_launch_is_motor_limited():
    # With grip to spare, the launch acceleration is the stall torque through the gearbox over
    # the mass and reflected inertia: a = W eta G tau_stall' / r / (m + W J / r^2), where the
    # current limit caps the torque at kt (I_lim) - tau_f (derivation, common practice).
    # A 10 A limit keeps the wheel force (43 N) well inside mu N (73 N) at mu = 2.5.
    r = robot("skid", mu=2.5)
    r = dataclasses.replace(r, motor=dataclasses.replace(r.motor, current_limit=10.0))
    world = World(r, 1)
    v = []
    drive(world, np.ones(4), 0.05, every=lambda k, w: v.append(w.velocity[0, 0]))
    k = motor_constants(r.motor, r.battery.voltage)
    amps = r.motor.current_limit
    tau = r.gear_efficiency * r.gear_ratio * (k.kt * amps - k.tau_f)
    a = 4 * tau / r.wheel_radius / (r.mass + 4 * r.wheel_inertia / r.wheel_radius**2)
    launch = float(np.max(np.diff([0.0, *v]))) / DT  # peak, once the slip that carries it is built
    assert launch == pytest.approx(a, rel=0.05)


def test_mecanum_launch_is_mu_g_over_root_two():
    # 45-degree rollers: each wheel grips only along its roller-locked direction, so the forward
    # share of a mu N force is 1/sqrt(2) (Lynch & Park, Modern Robotics 2017, §13.2 geometry).
    # Roller and rolling resistance are set to zero to isolate the geometric factor.
    r = robot("mecanum", traction=Traction(mu=0.3, roller_friction=0.0, rolling_resistance=0.0))
    world = World(r, 1)
    v = []
    drive(world, np.ones(4), 1.0, every=lambda k, w: v.append(w.velocity[0, 0]))
    accel = np.diff(v) / DT
    assert accel.max() == pytest.approx(0.3 * G0 / math.sqrt(2), rel=0.02)


def test_mecanum_strafe_and_spin():
    # The strafe pattern of the inverse kinematics (FL, FR, RL, RR = +, -, -, +) moves the robot
    # to its right; the spin pattern (-, +, -, +) turns it in place.
    r = robot("mecanum")
    world = World(r, 1)
    start = world.pose.copy()
    for _ in range(int(10.0 / DT)):  # 1 m sideways takes a few seconds; never hang
        if abs(world.pose[0, 1] - start[0, 1]) >= 1.0:
            break
        world.advance(np.array([[0.5, -0.5, -0.5, 0.5]]), DT)
    lateral = abs(world.pose[0, 1] - start[0, 1])
    assert lateral >= 1.0
    assert world.pose[0, 1] < 0
    assert abs(world.pose[0, 0]) < 0.03 * lateral
    assert abs(math.degrees(world.pose[0, 2])) < 2.0
    spin = World(r, 1)
    drive(spin, [-0.5, 0.5, -0.5, 0.5], 2.0)
    assert np.hypot(*spin.pose[0, :2]) < 0.01
    assert spin.velocity[0, 2] > 1.0


def test_skid_turning_resistance_and_current():
    # Published skid-steer result (Wong, Theory of Ground Vehicles, 4th ed. 2008, ch. 7): the
    # lateral scrub of four wheels at +-L/2 resists turning with a moment of about mu W L / 2.
    # The estimate takes the whole friction force as lateral; in our friction-circle model the
    # wheels also push longitudinally to drive the spin (F_long / F_lat = L / track), so the
    # check uses a wide, short robot (L / track = 0.36) where that share is small (cos = 0.94).
    r = robot("skid", footprint=(0.3, 0.6), track=0.55, wheelbase=0.2)
    geom = ChassisGeometry(kind="skid", wheel_radius=0.05, track=r.track, wheelbase=r.wheelbase, wheels=4)
    spin = World(r, 1)
    drive(spin, [-0.6, -0.6, 0.6, 0.6], 3.0)
    xy = geom.wheel_positions
    f = spin.wheel_force[0]
    scrub = abs(float(np.sum(xy[:, 0] * f[:, 1])))
    expected = r.traction.mu * r.mass * G0 * r.wheelbase / 2
    assert scrub == pytest.approx(expected, rel=0.15)
    straight = World(r, 1)
    target = float(np.mean(np.abs(spin.wheel_speed[0])))
    duty = 0.0
    while float(np.mean(straight.wheel_speed[0])) < target and duty < 1.0:  # same wheel speed
        duty += 0.01
        straight = World(r, 1)
        drive(straight, [duty] * 4, 2.0)
    assert np.mean(np.abs(spin.motor_current[0])) > 1.5 * np.mean(np.abs(straight.motor_current[0]))


@pytest.mark.parametrize("chassis", ["mecanum", "skid", "differential"])
def test_rest_stays_at_rest(chassis):
    # No input, no motion: friction must not chatter a robot into creeping (< 1 mm in 10 s).
    world = World(robot(chassis), 1)
    drive(world, np.zeros(world.geom.wheels), 10.0)
    assert np.hypot(*world.pose[0, :2]) < 1e-3
    assert abs(world.pose[0, 2]) < 1e-3


@pytest.mark.parametrize("chassis", ["mecanum", "skid"])
def test_coast_down_energy_never_increases(chassis):
    r = robot(chassis, idle="coast")
    world = World(r, 1)
    drive(world, np.ones(4), 1.0)
    geom = world.geom

    def energy(w):
        kin = 0.5 * r.mass * (w.velocity[0, 0] ** 2 + w.velocity[0, 1] ** 2) + 0.5 * r.yaw_inertia * w.velocity[0, 2] ** 2
        return kin + 0.5 * r.wheel_inertia * float(np.sum(w.wheel_speed[0] ** 2))

    e = [energy(world)]
    drive(world, np.zeros(geom.wheels), 3.0, every=lambda k, w: e.append(energy(w)))
    assert np.all(np.diff(e) <= 1e-9 * e[0])
    assert e[-1] < 0.5 * e[0]


@pytest.mark.parametrize("chassis", ["mecanum", "skid", "differential"])
def test_wheel_kinematics_match_body_without_slip(chassis):
    # With slip negligible, the forward kinematics of the wheel speeds is the body velocity.
    r = robot(chassis, traction=Traction(mu=2.5, slip_speed=0.005))
    world = World(r, 1, substep=0.0005)
    # (a turning skid chassis scrubs by nature, so it is checked driving straight)
    pattern = {"mecanum": [0.3, 0.4, 0.2, 0.3], "skid": [0.3, 0.3, 0.3, 0.3], "differential": [0.25, 0.35]}
    drive(world, pattern[chassis], 2.0)
    fk = world.geom.forward(world.wheel_speed)[0]
    v = world.velocity[0]
    assert np.hypot(*(fk[:2] - v[:2])) <= 0.01 * np.hypot(*v[:2])
    assert fk[2] == pytest.approx(v[2], rel=0.01, abs=1e-3)


def test_batch_equals_singles():
    # One World of 8 robots with different parameters steps exactly like 8 Worlds of one.
    r = robot("mecanum")
    params = {"mass": np.linspace(9, 15, 8), "traction.mu": np.linspace(0.4, 1.1, 8)}
    duty = np.array([[0.9, 0.2, -0.4, 0.6]]) * np.linspace(0.5, 1.0, 8)[:, None]
    batch = World(r, 8, params=params)
    drive(batch, duty, 1.0)
    for i in range(8):
        one = World(r, 1, params={k: v[i : i + 1] for k, v in params.items()})
        drive(one, duty[i : i + 1], 1.0)
        np.testing.assert_array_equal(one.pose[0], batch.pose[i])
        np.testing.assert_array_equal(one.wheel_speed[0], batch.wheel_speed[i])


def test_block_driver_and_threads_equal_singles_on_walls_and_patches():
    # Large batches go through the stage-by-stage block driver (vectorised, blocks over
    # threads), single robots robot by robot: a robot's numbers must not depend on which, on a
    # field with walls, a pillar and a slippery patch, with load transfer and varied robots.
    from sim.field import Field, Patch

    field = Field(
        name="bay", boundary=np.array([[0, 0], [3, 0], [3, 3], [0, 3]], float),
        obstacles=(np.array([[1.4, 1.4], [1.6, 1.4], [1.6, 1.6], [1.4, 1.6]], float),),
        patches=(Patch(polygon=np.array([[0.5, 0.5], [2.5, 0.5], [2.5, 1.2], [0.5, 1.2]], float), friction_scale=0.3),),
    )
    r = robot("skid", traction=Traction(mu=0.8, load_transfer=True, cg_height=0.1))
    n = 2 * 64 + 3  # two full blocks and a partial one
    rng = np.random.default_rng(7)
    pose0 = np.column_stack([rng.uniform(0.4, 2.6, n), rng.uniform(0.4, 2.6, n), rng.uniform(-3, 3, n)])
    params = {"mass": rng.uniform(9, 15, n), "traction.mu": rng.uniform(0.4, 1.1, n)}
    duty = rng.uniform(-1, 1, (n, 2))
    batch = World(r, n, field=field, params=params, pose0=pose0)
    drive(batch, duty, 1.5)
    assert batch.contact_count.sum() > 0  # the walls and the pillar are in play
    for i in (0, 63, 64, 100, n - 1):
        one = World(r, 1, field=field, params={k: v[i : i + 1] for k, v in params.items()}, pose0=pose0[i : i + 1])
        drive(one, duty[i : i + 1], 1.5)
        np.testing.assert_array_equal(one.pose[0], batch.pose[i])
        np.testing.assert_array_equal(one.wheel_speed[0], batch.wheel_speed[i])
        np.testing.assert_array_equal(one.wheel_load[0], batch.wheel_load[i])
        assert one.contact_count[0] == batch.contact_count[i]
        assert one.slip_energy[0] == batch.slip_energy[i]


def test_wall_push_stalls_without_tunnelling():
    from tests.sim.test_bad_input import FIELD  # noqa: F401  (keeps the field vocabulary shared)
    from sim.field import Field

    field = Field(name="box", boundary=np.array([[0, 0], [2, 0], [2, 2], [0, 2]], float))
    r = robot("skid")
    world = World(r, 1, field=field, pose0=np.array([[1.0, 1.0, 0.0]]))
    drive(world, np.ones(4), 4.0)
    front = world.pose[0, 0] + r.footprint[0] / 2
    assert 2.0 <= front < 2.02  # pressed against the wall, a few mm in at most
    assert world.contact_count[0] == 1  # pressed the whole time: one contact
    assert np.all(np.abs(world.motor_current[0]) <= r.motor.current_limit + 1e-9)
    assert 0 < world.peak_penetration[0] < 0.02


def test_load_transfer_matches_axle_load_formula():
    # Axle loads under acceleration (Gillespie, Fundamentals of Vehicle Dynamics, 1992, ch. 2):
    # the rear axle gains and the front axle loses m a_x h / L; in a steady turn the outer side
    # gains m a_y h / track with a_y = omega vx. The loads always sum to the weight.
    h_cg = 0.12
    r = robot("skid", traction=Traction(mu=0.9, load_transfer=True, cg_height=h_cg))
    world = World(r, 1)
    weight = r.mass * G0
    for _ in range(40):  # 0.2 s of a full-duty launch
        v0 = world.velocity[0, 0]
        world.advance(np.ones((1, 4)), DT)
    accel = (world.velocity[0, 0] - v0) / DT
    assert accel > 2.0
    load = world.wheel_load[0]  # FL... order: left front, left rear, right front, right rear
    xy = world.geom.wheel_positions
    front, rear = load[xy[:, 0] > 0].sum(), load[xy[:, 0] < 0].sum()
    assert load.sum() == pytest.approx(weight, rel=1e-12)
    assert (rear - front) / 2 == pytest.approx(r.mass * accel * h_cg / r.wheelbase, rel=0.03)
    # steady turn: left slower than right, so it turns left and the right side is outside
    turn = World(r, 1)
    drive(turn, [0.4, 0.4, 0.8, 0.8], 4.0)
    vx, om = turn.velocity[0, 0], turn.velocity[0, 2]
    assert om > 0.3
    load = turn.wheel_load[0]
    left, right = load[xy[:, 1] > 0].sum(), load[xy[:, 1] < 0].sum()
    assert (right - left) / 2 == pytest.approx(r.mass * om * vx * h_cg / r.track, rel=0.03)
    # without load transfer the loads stay static
    still = World(robot("skid"), 1)
    drive(still, np.ones(4), 0.2)
    np.testing.assert_allclose(still.wheel_load[0], weight / 4)


def test_substep_check_lowers_step_for_sharp_friction():
    r = robot("skid", traction=Traction(mu=1.0, slip_speed=0.002))
    h, note = World.check_substep(r, 0.001)
    assert h < 0.001 and "lowered" in note
    assert World.check_substep(robot("skid"), 0.001) == (0.001, None)


def test_shapes_and_empty_batch():
    for n in (0, 1, 5):
        w = World(robot("skid", wheels=6), n)
        w.advance(np.zeros((n, 2)), DT)
        assert w.pose.shape == (n, 3) and w.wheel_speed.shape == (n, 6) and w.battery_voltage.shape == (n,)
    assert dataclasses.is_dataclass(robot())
