"""Brushed DC motor constants from datasheet figures.

With the datasheet's free speed ``w_f``, stall torque ``tau_s``, stall current ``I_s`` and
free current ``I_f`` at voltage ``V`` (Hughes & Drury, *Electric Motors and Drives*, 4th ed.
2013, ch. 3: the steady-state DC motor ``V = R I + ke w``, ``tau = kt I``):

* winding resistance ``R = V / I_s`` (at stall there is no back-EMF);
* a constant friction torque carried by the no-load current, ``tau_f = kt I_f``, so at
  stall ``tau_s = kt (I_s - I_f)`` and ``kt = tau_s / (I_s - I_f)``;
* back-EMF constant from the free-running point, ``ke = (V - R I_f) / w_f``.

These are the same relations :func:`planners.control.feedforward_from_motor` uses, so the
derived feedforward matches the simulated motor.
"""

from __future__ import annotations

from dataclasses import dataclass

from sim.config_robot import Motor


@dataclass(frozen=True)
class MotorConstants:
    """Torque constant kt [N m/A], back-EMF constant ke [V s/rad], resistance R [ohm],
    friction torque tau_f [N m], at the motor shaft."""

    kt: float
    ke: float
    R: float
    tau_f: float

    def torque(self, voltage: float, speed: float) -> float:
        """Shaft torque at a voltage and shaft speed (steady state) [N m]."""
        return self.kt * (voltage - self.ke * speed) / self.R - self.tau_f

    def current(self, voltage: float, speed: float) -> float:
        """Current at a voltage and shaft speed [A]."""
        return (voltage - self.ke * speed) / self.R


def motor_constants(motor: Motor, voltage: float) -> MotorConstants:
    """Constants of ``motor`` from its datasheet figures at ``voltage`` (the nominal one)."""
    r = voltage / motor.stall_current
    kt = motor.stall_torque / (motor.stall_current - motor.free_current)
    ke = (voltage - r * motor.free_current) / motor.free_speed
    return MotorConstants(kt=kt, ke=ke, R=r, tau_f=kt * motor.free_current)
