"""Test robots of plausible small-robot numbers (invented, for tests only)."""

from __future__ import annotations

import dataclasses
import math

from sim.config_robot import Battery, Motor, Robot, Traction

MOTOR = Motor(
    free_speed=5800 * 2 * math.pi / 60, stall_torque=0.42, stall_current=22.0, free_current=1.4,
    current_limit=20.0,
)
BATTERY = Battery(voltage=12.6, resistance=0.025)


def robot(chassis: str = "skid", *, wheels: int | None = None, mu: float = 0.9, **kw) -> Robot:
    """A 12 kg robot, 0.45 m square, 5 cm wheels, 13.7:1 gearbox."""
    base = Robot(
        chassis=chassis, mass=12.0, footprint=(0.45, 0.45), wheel_radius=0.05, track=0.38,
        wheelbase=0.0 if chassis == "differential" else 0.34, gear_ratio=13.7, motor=MOTOR,
        battery=BATTERY, wheels=wheels, traction=Traction(mu=mu),
    )
    return dataclasses.replace(base, **kw)
