"""Gain synthesis: wheel-speed loop (discrete LQR, SIMC), path trackers, heading Kalman filter.

Everything here is pure design arithmetic on model constants: no state, no loop. The
wheel loop that uses the first part lives in :mod:`planners.control`; ``skidpad gains``
(:mod:`sim.gains`) prints all of it for one scenario.

* wheel speed: exact zero-order-hold discretisation, Bryson's weights, discrete LQR
  (:func:`velocity_lqr`) and Skogestad's SIMC integral time (:func:`simc_integral_gain`);
* trackers: the gains that put the linearised tracking error of the ``unicycle`` and
  ``holonomic`` trackers at a chosen natural frequency and damping
  (:func:`unicycle_gains`, :func:`holonomic_gains`);
* heading: the steady-state gain and covariance of the ``kalman`` estimator's
  heading/gyro-bias filter live beside this module, in :mod:`planners.gains_heading`.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg

from planners.errors import ScenarioError

# ---------------------------------------------------------------- wheel speed


def discretise_first_order(kV: float, kA: float, dt: float) -> tuple[float, float]:
    """Exact zero-order-hold discretisation of ``kA dw/dt + kV w = u``.

    Parameters
    ----------
    kV : float — [V s/rad], > 0
    kA : float — [V s^2/rad], > 0
    dt : float — sample period [s]

    Returns
    -------
    Ad, Bd : float — ``w[k+1] = Ad w[k] + Bd u[k]``: ``Ad = exp(-kV dt / kA)``,
        ``Bd = (1 - Ad) / kV`` [rad/s per V]
    """
    ad = float(np.exp(-kV / kA * dt))
    return ad, (1.0 - ad) / kV


def discretise(a: np.ndarray, b: np.ndarray, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact zero-order-hold discretisation of ``dx/dt = A x + B u``.

    Uses the matrix exponential of the block matrix ``[[A, B], [0, 0]] dt`` (Van Loan 1978).

    Parameters
    ----------
    a : ndarray, shape (n, n)
    b : ndarray, shape (n, m)
    dt : float — [s]

    Returns
    -------
    Ad : ndarray, shape (n, n)
    Bd : ndarray, shape (n, m)
    """
    a = np.atleast_2d(np.asarray(a, dtype=np.float64))
    b = np.asarray(b, dtype=np.float64).reshape(a.shape[0], -1)
    n, m = b.shape
    block = np.zeros((n + m, n + m))
    block[:n, :n] = a * dt
    block[:n, n:] = b * dt
    e = scipy.linalg.expm(block)
    return e[:n, :n], e[:n, n:]


def bryson(
    max_state: np.ndarray | float, max_input: np.ndarray | float
) -> tuple[np.ndarray, np.ndarray]:
    """Bryson's rule: diagonal weights ``1 / max^2`` (Bryson & Ho, *Applied Optimal Control*, 1975).

    Parameters
    ----------
    max_state : array_like, shape (n,) — largest acceptable value of each state
    max_input : array_like, shape (m,) — largest acceptable value of each input

    Returns
    -------
    Q : ndarray, shape (n, n)
    R : ndarray, shape (m, m)
    """
    xs = np.atleast_1d(np.asarray(max_state, dtype=np.float64))
    us = np.atleast_1d(np.asarray(max_input, dtype=np.float64))
    return np.diag(1.0 / xs**2), np.diag(1.0 / us**2)


def dlqr(
    a: np.ndarray, b: np.ndarray, q: np.ndarray, r: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Infinite-horizon discrete LQR: the gain minimising sum x'Qx + u'Ru, u = -K x.

    Solves the discrete algebraic Riccati equation with
    :func:`scipy.linalg.solve_discrete_are` and forms ``K = (R + B'PB)^-1 B'PA``.

    Parameters
    ----------
    a : ndarray, shape (n, n)
    b : ndarray, shape (n, m)
    q : ndarray, shape (n, n)
    r : ndarray, shape (m, m)

    Returns
    -------
    K : ndarray, shape (m, n)
    P : ndarray, shape (n, n) — the Riccati solution
    """
    a = np.atleast_2d(np.asarray(a, dtype=np.float64))
    b = np.asarray(b, dtype=np.float64).reshape(a.shape[0], -1)
    q = np.atleast_2d(np.asarray(q, dtype=np.float64))
    r = np.atleast_2d(np.asarray(r, dtype=np.float64))
    p = scipy.linalg.solve_discrete_are(a, b, q, r)
    k = np.linalg.solve(r + b.T @ p @ b, b.T @ p @ a)
    return k, p


def velocity_lqr(
    kV: np.ndarray | float,
    kA: np.ndarray | float,
    dt: float,
    *,
    max_error: np.ndarray | float,
    max_effort: np.ndarray | float,
) -> np.ndarray:
    """Proportional wheel-speed gain from discrete LQR on the first-order velocity model.

    Model ``dw/dt = A w + B u`` with ``A = -kV / kA``, ``B = 1 / kA`` (u in volts),
    discretised exactly (:func:`discretise_first_order`); weights by Bryson's rule,
    ``Q = 1 / max_error^2``, ``R = 1 / max_effort^2``.

    Parameters
    ----------
    kV, kA : float or ndarray, shape (W,)
    dt : float — control period [s]
    max_error : float or ndarray (W,) — speed error worth full effort [rad/s]
    max_effort : float or ndarray (W,) — [V]

    Returns
    -------
    ndarray, shape (W,) (the broadcast shape of the inputs, at least 1-D) — kP [V s/rad]
    """
    kv, ka, em, um = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (kV, kA, max_error, max_effort))
    )
    out = np.empty(kv.shape)
    for j in np.ndindex(kv.shape):
        ad, bd = discretise_first_order(kv[j], ka[j], dt)
        q, r = bryson(em[j], um[j])
        out[j] = dlqr(np.array([[ad]]), np.array([[bd]]), q, r)[0][0, 0]
    return out


def simc_integral_gain(
    kP: np.ndarray | float, kV: np.ndarray | float, kA: np.ndarray | float, dt: float
) -> np.ndarray:
    """Integral gain by Skogestad's SIMC rule for the integral time.

    Skogestad, *Simple analytic rules for model reduction and PID controller tuning*,
    J. Process Control 13 (2003), eq. (22): ``tau_I = min(tau_1, 4 (tau_c + theta))``, here
    with the plant time constant ``tau_1 = kA / kV``, no dead time, and ``tau_c`` the
    closed-loop time constant the gain kP gives on the discretised model.

    Parameters
    ----------
    kP, kV, kA : float or ndarray, shape (W,)
    dt : float — [s]

    Returns
    -------
    ndarray, shape (W,) — kI = kP / tau_I [V/rad]
    """
    kp, kv, ka = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (kP, kV, kA))
    )
    tau_i = np.minimum(ka / kv, 4.0 * velocity_loop_time_constant(kp, kv, ka, dt))
    return kp / tau_i


def velocity_loop_time_constant(
    kP: np.ndarray | float, kV: np.ndarray | float, kA: np.ndarray | float, dt: float
) -> np.ndarray:
    """Closed-loop time constant of the proportional wheel-speed loop on the discretised model.

    The pole of ``w[k+1] = Ad w[k] + Bd u[k]`` under ``u = -kP w`` is ``Ad - Bd kP``;
    ``tau_c = -dt / ln(pole)``, or ``dt`` for a pole at or below zero (settled within about
    one tick).

    Parameters
    ----------
    kP, kV, kA : float or ndarray, shape (W,)
    dt : float — [s]

    Returns
    -------
    ndarray, shape (W,) — tau_c [s]
    """
    kp, kv, ka = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (kP, kV, kA))
    )
    ad = np.exp(-kv / ka * dt)
    pole = ad - (1.0 - ad) / kv * kp
    return np.where(pole > 0.0, -dt / np.log(np.clip(pole, 1e-300, 1.0 - 1e-15)), dt)


def wheel_loop_weights(
    kS: np.ndarray | float,
    kV: np.ndarray | float,
    voltage: float,
    *,
    max_error: np.ndarray | float | None = None,
    max_effort: np.ndarray | float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Bryson bounds of the wheel-speed LQR, with the defaults the wheel loop uses.

    Parameters
    ----------
    kS : float or ndarray (W,) — [V]
    kV : float or ndarray (W,) — [V s/rad]
    voltage : float — battery voltage [V]
    max_error : float or ndarray (W,), optional — default 20 % of the free wheel speed
        ``(voltage - kS) / kV`` [rad/s]
    max_effort : float or ndarray (W,), optional — default ``voltage`` [V]

    Returns
    -------
    max_error : ndarray [rad/s]; max_effort : ndarray [V] — broadcast shape, at least 1-D
    """
    ks, kv = np.broadcast_arrays(*(np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (kS, kV)))
    err = 0.2 * (voltage - ks) / kv if max_error is None else max_error
    eff = voltage if max_effort is None else max_effort
    err, eff, _ = np.broadcast_arrays(*(np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (err, eff, ks)))
    return err, eff


# ---------------------------------------------------------------- trackers


def unicycle_gains(
    *, bandwidth: float, damping: float, speed: float, turn_rate: float = 0.0
) -> dict[str, float]:
    r"""``[tracker]`` keys of the ``unicycle`` tracker for a natural frequency and damping.

    The tracker's law (De Luca, Oriolo, Vendittelli, *Control of wheeled mobile robots: an
    experimental overview*, RAMSETE, LNCIS 270, Springer 2001, trajectory tracking by
    nonlinear control) is ``v = v_d cos e3 + k1 e1``,
    ``omega = omega_d + b v_d (sin e3 / e3) e2 + k3 e3`` with ``k1 = k3 = 2 zeta a``. About
    zero error and a reference at constant ``v_d, omega_d`` the error
    ``e = [e1, e2, e3]`` (robot frame) obeys ``e' = A e`` with

    .. math::

        A = \begin{bmatrix} -k_1 & \omega_d & 0 \\ -\omega_d & 0 & v_d \\
            0 & -b v_d & -k_3 \end{bmatrix}, \quad
        \det(sI - A) = (s + 2\zeta a)(s^2 + 2 \zeta a s + a^2),\; a^2 = \omega_d^2 + b v_d^2

    (derived here from the law; the source states the same poles), so ``a`` is the natural
    frequency and ``zeta`` the damping of the complex pair. Solving for ``b`` at the design
    point: ``b = (bandwidth^2 - omega_d^2) / v_d^2``. Slower than ``speed``, ``a`` shrinks in
    proportion to the speed.

    Parameters
    ----------
    bandwidth : float — natural frequency a wanted at the design point [rad/s], > 0
    damping : float — zeta, in (0, 1) (the tracker's range)
    speed : float — design speed v_d [m/s], nonzero
    turn_rate : float — design turn rate omega_d [rad/s], |omega_d| < bandwidth

    Returns
    -------
    dict — ``{"zeta": damping, "b": b [1/m^2]}``

    Raises
    ------
    ScenarioError
        For a bandwidth, damping, speed or turn rate out of range.
    """
    if not bandwidth > 0.0:
        raise ScenarioError(f"gains: bandwidth must be > 0 rad/s, got {bandwidth!r}")
    if not 0.0 < damping < 1.0:
        raise ScenarioError(
            f"gains: damping must be in (0, 1) (the unicycle tracker's zeta), got {damping!r}"
        )
    if not abs(speed) > 0.0:
        raise ScenarioError(f"gains: design speed must be nonzero, got {speed!r}")
    if not abs(turn_rate) < bandwidth:
        raise ScenarioError(
            f"gains: design turn rate must be below the bandwidth {bandwidth:g} rad/s in size, "
            f"got {turn_rate!r}"
        )
    return {"zeta": float(damping), "b": float((bandwidth**2 - turn_rate**2) / speed**2)}


def holonomic_gains(
    *, bandwidth: float, heading_bandwidth: float | None = None
) -> dict[str, float]:
    """``[tracker]`` keys of the ``holonomic`` tracker for a bandwidth per field axis.

    The tracker commands the field velocity ``p_d' + k (p_d - p)``, so on a plant that
    follows its command each axis error obeys ``e' = -k e`` (common practice for holonomic
    bases, no single source; Lynch & Park, *Modern Robotics*, 2017, §13.2 for the
    kinematics): first order, pole at ``-k``, bandwidth ``k`` [rad/s], no damping to set.

    Parameters
    ----------
    bandwidth : float — position bandwidth [rad/s], > 0
    heading_bandwidth : float, optional — heading bandwidth [rad/s], > 0 (default: bandwidth)

    Returns
    -------
    dict — ``{"bandwidth": k, "heading_bandwidth": k_h}`` [1/s]

    Raises
    ------
    ScenarioError
        For a bandwidth that is not positive.
    """
    k_h = bandwidth if heading_bandwidth is None else heading_bandwidth
    for name, value in (("bandwidth", bandwidth), ("heading_bandwidth", k_h)):
        if not value > 0.0:
            raise ScenarioError(f"gains: {name} must be > 0 rad/s, got {value!r}")
    return {"bandwidth": float(bandwidth), "heading_bandwidth": float(k_h)}

