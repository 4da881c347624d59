"""Wheel control: feedforward from kS, kV, kA and PI(D) feedback on wheel speed.

One control tick, per wheel ``j`` of robot ``i`` (wheel speeds are wheel-shaft angular speeds
[rad/s], positive driving the robot forward on differential and skid chassis)::

    u_ff = kS sign(w*) + kV w* + kA a*                          [V]
    u_fb = kP e + I + kD (a* - a_meas),   e = w* - w_meas      [V]
    duty = (u_ff + u_fb) / V_batt                               [-]

then every robot's wheel vector is scaled down together when any wheel passes |duty| = 1, so
the chassis keeps the direction of its motion and only slows down. The integral ``I`` is
clamped to ``+-i_limit`` and does not integrate on a wheel whose robot saturated while the
error pushes further into saturation (conditional integration, anti-windup).

Both terms are in volts and divided by the *measured* battery voltage, so the gains do not
change as the battery sags.

With ``speed_cutoff`` the measured speeds first pass the first-order low-pass of
:mod:`planners.filters` (off by default: it trades encoder quantisation noise for a lag of
``a T / (1 - a)``, about ``1 / (2 pi fc) - T / 2``, inside the loop).

The constants kS [V], kV [V s/rad], kA [V s^2/rad] come from ``[control]`` or, when absent,
from the motor datasheet through :func:`planners.feedforward.feedforward_from_motor`. kP and kI, when absent,
come from :func:`planners.gains.velocity_lqr` (discrete LQR on the first-order velocity model with
Bryson's weights) and :func:`planners.gains.simc_integral_gain` (Skogestad's SIMC rule for the
integral time).
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np
from numba import njit

from planners.arrays import as_rows
from planners.errors import ScenarioError
from planners.feedforward import Feedforward, feedforward_from_motor
from planners.filters import lowpass_coefficient, lowpass_kernel
from planners.gains import simc_integral_gain, velocity_lqr, wheel_loop_weights
from planners.params import Param

# the feedforward constants are derived in planners.feedforward and offered here with the loop
__all__ = ["Feedforward", "WheelController", "feedforward_from_motor"]


#: rows of the packed gains (7, N, W) and loop state (3, N, W) of :class:`WheelController`
_GAINS = ("kS", "kV", "kA", "kP", "kI", "kD", "i_limit")
_INTEG, _DFILT, _PREV = range(3)


@njit(cache=True, inline="always")
def _wheel_robot(i, target, accel, measured, vbatt, g, state, primed, dt, d_alpha, u, out):
    """The wheel loop of robot ``i`` for one tick (``u`` is (W,) scratch)."""
    w = target.shape[1]
    ks, kv, ka, kp, ki, kd, ilim = g[0], g[1], g[2], g[3], g[4], g[5], g[6]
    integ, dfilt, prev = state[_INTEG], state[_DFILT], state[_PREV]
    vb = max(vbatt[i], 1e-6)
    peak = 0.0
    for j in range(w):
        e = target[i, j] - measured[i, j]
        # derivative on measurement, first-order filtered
        if primed[i] and kd[i, j] != 0.0:
            raw = (measured[i, j] - prev[i, j]) / dt
            dfilt[i, j] += d_alpha * (raw - dfilt[i, j])
        prev[i, j] = measured[i, j]
        ff = ks[i, j] * np.sign(target[i, j]) + kv[i, j] * target[i, j] + ka[i, j] * accel[i, j]
        fb = kp[i, j] * e + kd[i, j] * (accel[i, j] - dfilt[i, j])
        trial = min(ilim[i, j], max(-ilim[i, j], integ[i, j] + ki[i, j] * e * dt))
        u[j] = ff + fb + trial
        peak = max(peak, abs(u[j]) / vb)
        out[i, j] = trial  # keep the trial integral until saturation is known
    primed[i] = True
    saturated = peak > 1.0
    for j in range(w):
        e = target[i, j] - measured[i, j]
        if saturated and e * u[j] > 0.0:
            # conditional integration: hold the integral pushing into saturation
            u[j] += integ[i, j] - out[i, j]
        else:
            integ[i, j] = out[i, j]
    peak = 0.0
    for j in range(w):
        peak = max(peak, abs(u[j]) / vb)
    scale = 1.0 / peak if peak > 1.0 else 1.0
    for j in range(w):
        out[i, j] = min(1.0, max(-1.0, u[j] / vb * scale))


@njit(cache=True)
def _wheel_kernel(target, accel, measured, vbatt, g, state, primed, dt, d_alpha, out):
    u = np.empty(target.shape[1])
    for i in range(target.shape[0]):
        _wheel_robot(i, target, accel, measured, vbatt, g, state, primed, dt, d_alpha, u, out)


@njit(cache=True)
def _twist_wheel_kernel(twist, twist_accel, matrix, measured, vbatt, g, state, primed, dt, d_alpha, target, accel, out):
    # wheel targets from the body twist (row by row, as planners.kinematics), then the loop
    u = np.empty(target.shape[1])
    for i in range(target.shape[0]):
        for a in range(matrix.shape[0]):
            v = 0.0
            dv = 0.0
            for b in range(3):
                v += twist[i, b] * matrix[a, b]
                dv += twist_accel[i, b] * matrix[a, b]
            target[i, a] = v
            accel[i, a] = dv
        _wheel_robot(i, target, accel, measured, vbatt, g, state, primed, dt, d_alpha, u, out)


def _p(dimension: str, default: Any, doc: str, **kw: Any) -> Param:
    return Param(dimension=dimension, default=default, doc=doc, **kw)


class WheelController:
    """Per-wheel velocity loop of N robots: feedforward + PI(D), common saturation scaling.

    Parameters
    ----------
    wheels : int — W, wheels per robot
    dt : float — control period [s]
    voltage : float — nominal battery voltage [V] (Bryson's effort bound, default i_limit)
    motor : Feedforward, optional — constants derived from the motor
        (:func:`feedforward_from_motor`), used for each of kS, kV, kA not given
    **params
        The ``[control]`` keys of :attr:`PARAMS`, in SI. A gain is a float, an array of
        shape (W,) (per wheel) or (N, W) (per robot and wheel, e.g. randomised).

    Raises
    ------
    ScenarioError
        For an unknown key, or a kS/kV/kA neither given nor derivable.

    Examples
    --------
    >>> ctl = WheelController(wheels=2, dt=0.005, voltage=12.0, kS=0.2, kV=0.4, kA=0.04)
    >>> ctl.reset(1)
    >>> ctl.duty(np.full((1, 2), 10.0), np.zeros((1, 2)), np.full((1, 2), 10.0),
    ...          np.array([12.0])).round(4)
    array([[0.35, 0.35]])
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "kS": _p("voltage", None, "static friction voltage (default: from the motor)", ge=0.0),
        "kV": _p(
            "dimensionless", None, "V per rad/s of wheel speed (default: from the motor)", gt=0.0
        ),
        "kA": _p(
            "dimensionless", None, "V per rad/s^2 of wheel accel (default: from the motor)", gt=0.0
        ),
        "kP": _p(
            "dimensionless", None, "V per rad/s of speed error (default: discrete LQR)", ge=0.0
        ),
        "kI": _p(
            "dimensionless", None, "V per rad of integrated speed error (default: SIMC)", ge=0.0
        ),
        "kD": _p(
            "dimensionless", 0.0, "V per rad/s^2 of accel error (derivative on measurement)", ge=0.0
        ),
        "d_filter": _p("time", 0.01, "time constant of the measured-accel filter", ge=0.0),
        "speed_cutoff": _p(
            "frequency", None, "first-order low-pass of the measured wheel speeds (default: off)",
            gt=0.0,
        ),
        "i_limit": _p(
            "voltage",
            None,
            "bound on the integral term (default: a quarter of the battery)",
            ge=0.0,
        ),
        "max_error": _p(
            "angular_speed",
            None,
            "LQR/Bryson: largest speed error (default: 20 % of free speed)",
            gt=0.0,
        ),
        "max_effort": _p(
            "voltage", None, "LQR/Bryson: largest correction (default: the battery voltage)", gt=0.0
        ),
    }

    def __init__(
        self,
        *,
        wheels: int,
        dt: float,
        voltage: float,
        motor: Feedforward | None = None,
        **params: Any,
    ) -> None:
        from planners.trackers.base import resolve_params  # here: trackers import control

        p = resolve_params("control", self.PARAMS, params)
        self.wheels = int(wheels)
        self.dt = float(dt)
        self.voltage = float(voltage)
        derived = {} if motor is None else {"kS": motor.kS, "kV": motor.kV, "kA": motor.kA}
        for key in ("kS", "kV", "kA"):
            if p[key] is None:
                if key not in derived:
                    raise ScenarioError(
                        f"control: {key} must be given or derived from [robot.motor], got nothing"
                    )
                p[key] = derived[key]
        gains = ("kS", "kV", "kA", "kP", "kI", "kD", "i_limit", "max_error", "max_effort")
        for key in gains:
            arr = np.asarray(0.0 if p[key] is None else p[key], dtype=np.float64)
            if arr.ndim > 2 or (arr.ndim >= 1 and arr.shape[-1] not in (1, self.wheels)):
                raise ScenarioError(
                    f"control: {key} must be a number, one per wheel ({self.wheels}) or "
                    f"(N, {self.wheels}), got shape {arr.shape}"
                )
        if p["kP"] is None or p["kI"] is None:
            ks, kv, ka = np.broadcast_arrays(
                *(np.asarray(p[k], dtype=np.float64) for k in ("kS", "kV", "kA"))
            )
            max_error, max_effort = wheel_loop_weights(
                ks, kv, self.voltage, max_error=p["max_error"], max_effort=p["max_effort"]
            )
            if p["kP"] is None:
                p["kP"] = velocity_lqr(kv, ka, self.dt, max_error=max_error, max_effort=max_effort)
            if p["kI"] is None:
                p["kI"] = simc_integral_gain(p["kP"], kv, ka, self.dt)
        if p["i_limit"] is None:
            p["i_limit"] = 0.25 * self.voltage
        self.params = p
        if all(np.ndim(p[k]) < 2 for k in self.PARAMS if p[k] is not None):
            self.reset(0)
        else:  # per-robot gains: the batch size is known at reset
            self._integ = None

    @property
    def gains(self) -> dict[str, np.ndarray]:
        """The resolved kS, kV, kA, kP, kI, kD, i_limit (float or (W,) or (N, W))."""
        keys = ("kS", "kV", "kA", "kP", "kI", "kD", "i_limit")
        return {k: np.asarray(self.params[k], dtype=np.float64) for k in keys}

    def reset(self, n: int) -> None:
        """Start N robots at rest: integrals, filters and previous speeds cleared.

        Raises
        ------
        ScenarioError
            When a per-robot gain of shape (N', W) does not match ``n``.
        """
        shape = (int(n), self.wheels)
        gains = self.gains
        self._g = np.ascontiguousarray(np.stack([_per_wheel(gains[k], shape, k) for k in _GAINS]))
        self._state = np.zeros((3, *shape))
        self._integ = self._state[_INTEG]
        self._shape = shape
        self._primed = np.zeros(shape[0], dtype=np.bool_)
        cutoff = self.params["speed_cutoff"]
        self._speed_a = None if cutoff is None else lowpass_coefficient(cutoff, self.dt)
        self._speed = np.zeros(shape)
        tau = self.params["d_filter"]
        self._d_alpha = 1.0 if tau <= 0.0 else float(1.0 - np.exp(-self.dt / tau))

    @property
    def integral(self) -> np.ndarray:
        """Integral term of each wheel, shape (N, W) [V]."""
        return self._integ.copy()

    def duty(
        self,
        target_speed: np.ndarray,
        target_accel: np.ndarray,
        measured_speed: np.ndarray,
        battery_voltage: np.ndarray,
    ) -> np.ndarray:
        """One tick of the wheel loop.

        Parameters
        ----------
        target_speed : ndarray, shape (N, W) — wheel speed targets [rad/s]
        target_accel : ndarray, shape (N, W) — wheel acceleration feedforward [rad/s^2]
        measured_speed : ndarray, shape (N, W) — wheel speeds from the encoders [rad/s]
        battery_voltage : ndarray, shape (N,) — measured battery voltage [V]

        Returns
        -------
        ndarray, shape (N, W) — duty in [-1, 1]; a robot's vector is scaled down together
        """
        if self._integ is None:
            raise RuntimeError("WheelController.duty: call reset(n) first")
        shape = self._shape
        vb = battery_voltage
        if np.ndim(vb) != 1:
            vb = np.asarray(vb, dtype=np.float64).reshape(-1)
        out = np.empty(shape)
        _wheel_kernel(
            as_rows(target_speed, shape), as_rows(target_accel, shape), self._measured(measured_speed),
            as_rows(vb, shape[:1]), self._g, self._state, self._primed, self.dt, self._d_alpha, out,
        )
        return out

    def _measured(self, measured_speed: np.ndarray) -> np.ndarray:
        # the measured wheel speeds, through the optional low-pass
        # (planners.filters: its lag, a T / (1 - a), delays the loop)
        measured = as_rows(measured_speed, self._shape)
        if self._speed_a is None:
            return measured
        lowpass_kernel(self._speed, measured, self._speed_a)
        return self._speed


    def duty_from_twist(
        self,
        twist: np.ndarray,
        twist_accel: np.ndarray,
        inverse_matrix: np.ndarray,
        measured_speed: np.ndarray,
        battery_voltage: np.ndarray,
    ) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`duty` for a body command: wheel targets by the inverse kinematics first.

        Parameters
        ----------
        twist, twist_accel : ndarray, shape (N, 3) — body velocity and its feedforward
            acceleration (vx, vy, omega), body frame
        inverse_matrix : ndarray, shape (W, 3) — body twist -> wheel speeds
            (:attr:`planners.kinematics.ChassisGeometry.inverse_matrix`)
        measured_speed, battery_voltage : as :meth:`duty`

        Returns
        -------
        duty : ndarray, shape (N, W)
        target_speed : ndarray, shape (N, W) — the wheel speed targets [rad/s]
        """
        if self._integ is None:
            raise RuntimeError("WheelController.duty_from_twist: call reset(n) first")
        shape = self._shape
        n = shape[0]
        target = np.empty(shape)
        accel = np.empty(shape)
        out = np.empty(shape)
        _twist_wheel_kernel(
            as_rows(twist, (n, 3)), as_rows(twist_accel, (n, 3)), as_rows(inverse_matrix, (self.wheels, 3)),
            self._measured(measured_speed), as_rows(battery_voltage, (n,)), self._g, self._state,
            self._primed, self.dt, self._d_alpha, target, accel, out,
        )
        return out, target


def _per_wheel(value: np.ndarray, shape: tuple[int, int], key: str) -> np.ndarray:
    value = np.asarray(value, dtype=np.float64)
    try:
        return np.broadcast_to(value, shape)
    except ValueError:
        raise ScenarioError(
            f"control: {key} must be a number, one per wheel ({shape[1]}) or one row per robot "
            f"({shape[0]}, {shape[1]}), got shape {value.shape}"
        ) from None
