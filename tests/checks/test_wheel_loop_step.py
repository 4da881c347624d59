"""Step response of the wheel-speed loop on a first-order motor model.

Plant: kA dw/dt + kV w + kS sign(w) = u, u = duty * V_batt held over each tick (zero-order
hold), integrated exactly per tick. The constants come from a datasheet through
planners.control.feedforward_from_motor; the controller is given the same constants.

Sources:
- first-order step response w(t) = w* (1 - exp(-t / T)), T = kA / kV, reaching 90 % at
  T ln 10: K. Ogata, *Modern Control Engineering*, 5th ed. (2010), ch. 5, first-order systems;
- the zero-order-hold model w[k+1] = Ad w[k] + Bd u[k] with Ad = exp(-dt / T),
  Bd = (1 - Ad) / kV: G. F. Franklin, J. D. Powell, M. L. Workman, *Digital Control of
  Dynamic Systems*, 3rd ed. (1998), ch. 4 (discrete equivalents, ZOH);
- the closed-loop error under proportional feedback decays as (Ad - Bd kP)^k on that model
  (derived from the same, no further source).
"""

from __future__ import annotations

import numpy as np
import pytest

from planners.control import WheelController, feedforward_from_motor
from planners.gains import discretise_first_order

DT = 0.005
VOLTAGE = 12.0
MOTOR = feedforward_from_motor(
    free_speed=6000 * 2 * np.pi / 60,
    stall_torque=0.4,
    stall_current=30.0,
    free_current=0.8,
    voltage=VOLTAGE,
    gear_ratio=15.0,
    gear_efficiency=0.9,
    mass_share=4.0,
    wheel_radius=0.05,
    wheel_inertia=3e-4,
    wheels=1,
)


def _step(ctl: WheelController, target: float, *, plant_scale: float = 1.0, ticks: int = 400):
    """Speeds at tick starts; the plant's kV is ``plant_scale`` times the controller's."""
    ks, kv, ka = float(MOTOR.kS[0]), float(MOTOR.kV[0]) * plant_scale, float(MOTOR.kA[0])
    ad, bd = discretise_first_order(kv, ka, DT)
    ctl.reset(1)
    w = 0.0
    out = np.empty(ticks)
    for k in range(ticks):
        out[k] = w
        duty = ctl.duty(
            np.array([[target]]), np.zeros((1, 1)), np.array([[w]]), np.array([VOLTAGE])
        )
        u = float(duty[0, 0]) * VOLTAGE
        # static friction: the wheel starts only when u exceeds kS (target > 0 here)
        w = ad * w + bd * (u - ks) if (w > 0.0 or u > ks) else 0.0
    return out


def _t90(speeds: np.ndarray, target: float) -> float:
    return float(np.argmax(speeds >= 0.9 * target)) * DT


def test_feedforward_alone_follows_the_first_order_prediction():
    # T ln 10 (Ogata 2010, first-order systems), sampled: the first tick at or after it
    ctl = WheelController(wheels=1, dt=DT, voltage=VOLTAGE, motor=MOTOR, kP=0.0, kI=0.0)
    target = 0.5 * float(MOTOR.free_speed[0])
    t90 = float(MOTOR.time_constant[0]) * np.log(10.0)
    measured = _t90(_step(ctl, target), target)
    assert t90 <= measured + 1e-12 <= t90 + DT
    assert 0.02 < t90 < 1.0  # a realistic motor, not a degenerate one


def test_proportional_loop_follows_the_discrete_prediction():
    # error decays as (Ad - Bd kP)^k (Franklin, Powell, Workman 1998, ZOH model), unsaturated
    kp = 0.8 * float(MOTOR.kV[0])
    ctl = WheelController(wheels=1, dt=DT, voltage=VOLTAGE, motor=MOTOR, kP=kp, kI=0.0)
    target = 0.2 * float(MOTOR.free_speed[0])
    ad, bd = discretise_first_order(float(MOTOR.kV[0]), float(MOTOR.kA[0]), DT)
    k90 = int(np.ceil(np.log(0.1) / np.log(ad - bd * kp)))
    assert _t90(_step(ctl, target), target) == pytest.approx(k90 * DT, abs=1e-12)
    # and faster than feedforward alone: T_cl = kA / (kV + kP) (first-order closed loop)
    assert k90 * DT < float(MOTOR.time_constant[0]) * np.log(10.0)


@pytest.mark.parametrize("fraction", [0.2, 0.5, 0.8])
def test_default_pi_is_no_slower_than_first_order(fraction):
    # default gains (discrete LQR + SIMC), saturating at the start: still within T ln 10
    ctl = WheelController(wheels=1, dt=DT, voltage=VOLTAGE, motor=MOTOR)
    target = fraction * float(MOTOR.free_speed[0])
    speeds = _step(ctl, target)
    assert _t90(speeds, target) <= float(MOTOR.time_constant[0]) * np.log(10.0)
    assert abs(speeds[-1] - target) < 1e-3 * target
    # bounded overshoot: the integral charges while a true step rises (plans give smooth
    # targets with accel feedforward, where it does not)
    assert np.max(speeds) < 1.15 * target


def test_integral_removes_model_error():
    # the real motor has 15 % more back-EMF than the constants say: PI recovers the target
    ctl = WheelController(wheels=1, dt=DT, voltage=VOLTAGE, motor=MOTOR)
    target = 0.5 * float(MOTOR.free_speed[0])
    speeds = _step(ctl, target, plant_scale=1.15, ticks=600)
    assert abs(speeds[-1] - target) < 2e-3 * target
    no_i = WheelController(wheels=1, dt=DT, voltage=VOLTAGE, motor=MOTOR, kI=0.0)
    offset = target - _step(no_i, target, plant_scale=1.15, ticks=600)[-1]
    assert offset > 0.02 * target  # without it a steady error remains
