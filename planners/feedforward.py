"""Wheel feedforward constants kS, kV, kA from a DC motor's datasheet figures.

:func:`feedforward_from_motor` derives the three constants of the wheel loop's feedforward
``u = kS sign(w) + kV w + kA a`` (planners.control) from the motor, gearbox, wheel and the
robot's mass share, for a ``[control]`` table that leaves them out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planners.errors import ScenarioError


@dataclass(frozen=True)
class Feedforward:
    """Feedforward constants of the wheels of one robot.

    Attributes
    ----------
    kS : ndarray, shape (W,) — static friction voltage [V]
    kV : ndarray, shape (W,) — back-EMF voltage per wheel speed [V s/rad]
    kA : ndarray, shape (W,) — voltage per wheel acceleration [V s^2/rad]
    voltage : float — the voltage the constants were derived at [V]
    """

    kS: np.ndarray
    kV: np.ndarray
    kA: np.ndarray
    voltage: float

    @property
    def free_speed(self) -> np.ndarray:
        """Wheel speed reached at ``voltage`` with no load, shape (W,) [rad/s]."""
        return (self.voltage - self.kS) / self.kV

    @property
    def time_constant(self) -> np.ndarray:
        """First-order time constant kA / kV, shape (W,) [s]."""
        return self.kA / self.kV


def feedforward_from_motor(
    *,
    free_speed: float | np.ndarray,
    stall_torque: float | np.ndarray,
    stall_current: float | np.ndarray,
    free_current: float | np.ndarray,
    voltage: float,
    gear_ratio: float | np.ndarray,
    gear_efficiency: float | np.ndarray = 1.0,
    mass_share: float | np.ndarray,
    wheel_radius: float | np.ndarray,
    wheel_inertia: float | np.ndarray = 0.0,
    rotor_inertia: float | np.ndarray = 0.0,
    wheels: int = 1,
) -> Feedforward:
    r"""Derive kS, kV, kA of each wheel from a brushed DC motor's datasheet.

    Motor model (figures at the shaft, before the gearbox, all at ``voltage``): armature
    resistance :math:`R = V / I_s`; a constant friction torque :math:`\tau_f = k_t I_f`
    carried by the no-load current, so that at stall :math:`\tau_s = k_t (I_s - I_f)`,
    giving :math:`k_t = \tau_s / (I_s - I_f)`; back-EMF from the free-running point
    :math:`V = R I_f + k_e \omega_f`, giving :math:`k_e = (V - R I_f) / \omega_f`.

    Drive: motor speed :math:`\omega_m = G \omega_w` (``gear_ratio`` G is motor turns per
    wheel turn); the gearbox passes :math:`\eta G` times its input torque to the wheel. The
    wheel accelerates its load :math:`J_L = m_{share} r^2 + J_{wheel}` (``mass_share``: the
    part of the robot mass one wheel pushes on a straight run, e.g. mass / W) and the rotor
    :math:`J_r` (before the gearbox, so without gear losses). Torque balance at the shaft,
    :math:`k_t I = \tau_f + (J_r G + J_L / (\eta G)) \dot\omega_w`, and the voltage
    :math:`V = R I + k_e G \omega_w` give

    .. math::

        V = \underbrace{R I_f}_{k_S} \operatorname{sign}(\omega_w)
            + \underbrace{k_e G}_{k_V} \omega_w
            + \underbrace{\tfrac{R}{k_t}\left(J_r G + \tfrac{J_L}{\eta G}\right)}_{k_A}
              \dot\omega_w ,

    so :math:`k_S + k_V \omega_f / G = V`: full voltage reaches the free speed.

    Parameters
    ----------
    free_speed : float or ndarray (W,) — no-load motor speed [rad/s, motor shaft]
    stall_torque : float or ndarray (W,) — [N m, motor shaft]
    stall_current, free_current : float or ndarray (W,) — [A]
    voltage : float — voltage of the datasheet figures (the nominal battery voltage) [V]
    gear_ratio : float or ndarray (W,) — motor turns per wheel turn
    gear_efficiency : float or ndarray (W,) — torque efficiency of the gearbox (0, 1]
    mass_share : float or ndarray (W,) — robot mass one wheel accelerates [kg]
    wheel_radius : float or ndarray (W,) — [m]
    wheel_inertia : float or ndarray (W,) — the wheel's own moment of inertia [kg m^2]
    rotor_inertia : float or ndarray (W,) — motor rotor moment of inertia [kg m^2]
    wheels : int — W, the number of wheels the scalars are broadcast to

    Returns
    -------
    Feedforward — kS [V], kV [V s/rad], kA [V s^2/rad] per wheel, shape (W,)

    Raises
    ------
    ScenarioError
        When the currents are not 0 <= free_current < stall_current or a value is not
        positive.

    Examples
    --------
    >>> ff = feedforward_from_motor(free_speed=600.0, stall_torque=0.2, stall_current=20.0,
    ...     free_current=0.5, voltage=12.0, gear_ratio=20.0, mass_share=2.5,
    ...     wheel_radius=0.05, wheels=2)
    >>> bool(np.allclose(ff.kS + ff.kV * 600.0 / 20.0, 12.0))
    True
    """
    shape = (int(wheels),)
    a = {
        k: np.broadcast_to(np.asarray(v, dtype=np.float64), shape).copy()
        for k, v in dict(
            free_speed=free_speed,
            stall_torque=stall_torque,
            stall_current=stall_current,
            free_current=free_current,
            gear_ratio=gear_ratio,
            gear_efficiency=gear_efficiency,
            mass_share=mass_share,
            wheel_radius=wheel_radius,
            wheel_inertia=wheel_inertia,
            rotor_inertia=rotor_inertia,
        ).items()
    }
    for key in ("free_speed", "stall_torque", "stall_current", "gear_ratio", "gear_efficiency"):
        if not np.all(a[key] > 0.0):
            raise ScenarioError(f"motor: {key} must be > 0, got {a[key].tolist()}")
    if not voltage > 0.0:
        raise ScenarioError(f"motor: voltage must be > 0, got {voltage!r}")
    if not np.all((a["free_current"] >= 0.0) & (a["free_current"] < a["stall_current"])):
        raise ScenarioError(
            "motor: free_current must be >= 0 and < stall_current, "
            f"got {a['free_current'].tolist()}"
        )
    resistance = voltage / a["stall_current"]
    kt = a["stall_torque"] / (a["stall_current"] - a["free_current"])
    ke = (voltage - resistance * a["free_current"]) / a["free_speed"]
    g, eta = a["gear_ratio"], a["gear_efficiency"]
    j_load = a["mass_share"] * a["wheel_radius"] ** 2 + a["wheel_inertia"]
    ks = resistance * a["free_current"]
    kv = ke * g
    ka = resistance / kt * (a["rotor_inertia"] * g + j_load / (eta * g))
    return Feedforward(kS=ks, kV=kv, kA=ka, voltage=float(voltage))


# ---------------------------------------------------------------- the loop
