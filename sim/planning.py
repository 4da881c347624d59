"""Scenario -> plan: the route timed for the scenario's chassis, checked against the field."""

from __future__ import annotations

import numpy as np

from planners.kinematics import ChassisGeometry
from planners.plan import Plan
from planners.timing import time_route
from sim.config_robot import Robot
from sim.plan_checks import check_plan_clearance
from sim.scenario import Scenario


def geometry(robot: Robot) -> ChassisGeometry:
    """Robot-side chassis geometry of a scenario robot."""
    return ChassisGeometry(
        kind=robot.chassis,
        wheel_radius=robot.wheel_radius,
        track=robot.track,
        wheelbase=robot.wheelbase,
        wheels=robot.wheel_count,
    )


def wheel_free_speed(robot: Robot) -> float:
    """No-load wheel speed at the battery's open-circuit voltage [rad/s]."""
    nominal = robot.motor.nominal_voltage or robot.battery.voltage
    return robot.motor.free_speed / robot.gear_ratio * robot.battery.voltage / nominal


def make_plan(scenario: Scenario) -> Plan:
    """Time the scenario's route for its chassis at the control rate."""
    robot = scenario.robot
    if not scenario.route.waypoints:
        return _standing_plan(scenario)
    geom = geometry(robot)
    plan = time_route(
        scenario.route,
        chassis=robot.chassis,
        rate=scenario.run.rate,
        inverse_kinematics=geom.inverse,
        max_wheel_speed=wheel_free_speed(robot),
    )
    check_plan_clearance(plan, scenario.field.free_space, half_width=robot.footprint[1] / 2)
    return plan


def _standing_plan(scenario: Scenario) -> Plan:
    """A plan that stays at the start (for open-loop voltage-script runs)."""
    x, y, h = scenario.route.start
    dt = 1.0 / scenario.run.rate
    one = np.array([[x, y, h]])
    z = np.zeros((1, 3))
    return Plan(
        dt=dt, t=np.zeros(1), pose=one, velocity=z, accel=z, curvature=np.zeros(1), s=np.zeros(1),
        path_x=np.array([x, x + 1e-9]), path_y=np.array([y, y]), path_s=np.array([0.0, 1e-9]),
        path_heading=np.array([h, h]),
    )
