"""Round trip: simulated characterisation logs -> fitted kS, kV, kA -> the motor model's values.

Reference: the constants implied by the motor datasheet model (Hughes & Drury, *Electric
Motors and Drives*, 4th ed. 2013, ch. 3: V = R I + ke w, tau = kt I, with the friction torque
carried by the no-load current), as :func:`planners.control.feedforward_from_motor` derives
them and :mod:`sim.runner` uses them.

kS on the floor is more than the motor's R I_f: the simulator's traction model
(:mod:`sim.traction`) drags every wheel with rolling resistance ``crr * load`` along its grip
direction and, for mecanum, roller resistance ``roller * load`` across it, a constant force the
motors push against while moving. At the wheel shaft that is a torque ``c * load * r_eff``
(``r_eff = r`` for skid wheels, ``r / sqrt(2)`` for 45-degree mecanum rollers, whose grip and
roller forces both project onto the chassis x axis by 1 / sqrt(2)), worth
``(R / kt) c load r_eff / (eta G)`` volts through the gearbox: 5.6 % of kS for the skid cart,
9.4 % for the mecanum robot (derived from the simulator's force model; no outside source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from planners.control import feedforward_from_motor
from planners.identify import fit_feedforward
from planners.robot_log import read_log
from sim.log_recorder import run_logged
from sim.motors import motor_constants
from sim.physics import G0
from sim.runner import Simulation
from sim.scenario import load_scenario

SCENARIOS = ["scenarios/characterise-ramp-step-skid.toml", "scenarios/characterise-ramp-step-mecanum.toml"]


def _implied(robot):
    m = robot.motor
    voltage = m.nominal_voltage or robot.battery.voltage
    ff = feedforward_from_motor(  # as sim/runner.py calls it
        free_speed=m.free_speed, stall_torque=m.stall_torque, stall_current=m.stall_current,
        free_current=m.free_current, voltage=voltage, gear_ratio=robot.gear_ratio,
        gear_efficiency=robot.gear_efficiency, mass_share=robot.mass / robot.wheel_count,
        wheel_radius=robot.wheel_radius, wheel_inertia=robot.wheel_inertia, rotor_inertia=m.rotor_inertia,
        wheels=robot.wheel_count,
    )
    k = motor_constants(m, voltage)
    tr = robot.traction
    load = robot.mass * G0 / robot.wheel_count
    if robot.chassis == "mecanum":
        drag, r_eff = tr.rolling_resistance + tr.roller_friction, robot.wheel_radius / math.sqrt(2.0)
    else:
        drag, r_eff = tr.rolling_resistance, robot.wheel_radius
    ks_floor = k.R / k.kt * drag * load * r_eff / (robot.gear_efficiency * robot.gear_ratio)
    return float(ff.kS[0]), float(ff.kV[0]), float(ff.kA[0]), ks_floor


@pytest.fixture(scope="module", params=SCENARIOS, ids=["skid", "mecanum"])
def round_trip(request, tmp_path_factory):
    sc = load_scenario(request.param)
    sim = Simulation(sc, runs=[0])
    path = run_logged(sim).write(tmp_path_factory.mktemp("logs") / "char.csv")
    log = read_log(path)
    return sc, sim.results()[0].scorecard, log, fit_feedforward(log)


def test_fitted_constants_match_the_motor_model(round_trip):
    sc, _, _, fit = round_trip
    ks, kv, ka, ks_floor = _implied(sc.robot)
    for name, f in [("pooled", fit.pooled)] + [(w, wf.fit) for w, wf in fit.wheels.items()]:
        assert f.kV == pytest.approx(kv, rel=0.05), name
        assert f.kA == pytest.approx(ka, rel=0.05), name
        # kS: 5 % of the motor's R I_f plus the floor's drag; within 12 % of R I_f alone
        assert f.kS == pytest.approx(ks + ks_floor, rel=0.05), name
        assert f.kS == pytest.approx(ks, rel=0.12), name
        assert f.ka_separable and f.r2 > 0.999, name
    # tighter than the 5 % where the bundled logs allow it, so a regression shows early
    assert fit.pooled.kV == pytest.approx(kv, rel=0.005)
    assert fit.pooled.kA == pytest.approx(ka, rel=0.02)
    assert fit.pooled.kS == pytest.approx(ks + ks_floor, rel=0.01)


def test_characterisation_drive_stays_straight_and_on_the_floor(round_trip):
    sc, card, log, _ = round_trip
    assert card["status"] == "completed" and card["collisions"] == 0
    x, y, heading = log.column("true_x"), log.column("true_y"), log.column("true_heading")
    x0, y0, h0 = sc.route.start
    assert np.max(np.abs(y - y0)) < 0.01 and np.max(np.abs(heading - h0)) < math.radians(1.0)
    assert 0.5 < x.min() and x.max() < 11.0  # the dock's south lane is clear from x = 0 to 12 m
    assert abs(x[-1] - x0) < 0.2  # forward and reverse legs mirror each other
