"""One-dimensional motion profiles: trapezoidal and jerk-limited (seven-phase S-curve).

A profile moves a distance ``h`` from speed ``v0`` to speed ``v1`` in least time under a
speed limit, an acceleration limit, a braking limit and (S-curve) a jerk limit. Both kinds
are returned as a :class:`Profile`: piecewise constant jerk, sampled exactly.

The phase times follow Biagiotti & Melchiorri, *Trajectory Planning for Automatic Machines
and Robots* (2008), ch. 3 (trapezoidal velocity with given initial and final speeds;
the "double S" velocity profile). Two choices of ours:

* the braking limit may differ from the acceleration limit (the book's formulas are the
  case ``max_decel == max_accel``);
* where the distance is too short for the cruise phase, the book solves for the peak speed
  in closed form when both acceleration phases reach the limit and otherwise lowers the
  acceleration limit step by step (or drops the acceleration phase). We instead solve the
  peak speed exactly (the distance covered is increasing in it): the times equal the
  book's closed forms wherever those apply, and are never longer elsewhere.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq

from planners.errors import PlanError


@dataclass(frozen=True, eq=False)
class Profile:
    """Piecewise constant-jerk motion along one axis.

    Attributes
    ----------
    knots : ndarray, shape (P + 1,) — phase boundaries [s], ``knots[0] == 0``
    jerk : ndarray, shape (P,) — jerk in each phase [m/s^3]
    q0, v0, a0 : ndarray, shape (P,) — position [m], speed [m/s], acceleration [m/s^2]
        at the start of each phase
    timings : dict — named durations [s]: ``accel`` (Ta), ``cruise`` (Tv), ``decel`` (Td)
        and for the S-curve ``accel_jerk`` (Tj1), ``decel_jerk`` (Tj2)
    peak_speed : float — highest speed reached [m/s] (signed like the distance)
    """

    knots: np.ndarray
    jerk: np.ndarray
    q0: np.ndarray
    v0: np.ndarray
    a0: np.ndarray
    timings: dict = field(default_factory=dict)
    peak_speed: float = 0.0

    @property
    def duration(self) -> float:
        """Total time [s]."""
        return float(self.knots[-1])

    @property
    def distance(self) -> float:
        """Signed distance covered [m]."""
        q, _, _, _ = self.sample(np.array([self.duration]))
        return float(q[0])

    def sample(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Position, speed, acceleration and jerk at times ``t``.

        Times outside ``[0, duration]`` continue at the start or end speed (no acceleration).

        Parameters
        ----------
        t : ndarray, shape (N,) — time [s]

        Returns
        -------
        q, v, a, j : ndarray, each shape (N,) — [m], [m/s], [m/s^2], [m/s^3]
        """
        t = np.atleast_1d(np.asarray(t, dtype=np.float64))
        p = len(self.jerk)
        if p == 0:
            z = np.zeros_like(t)
            return z, z.copy(), z.copy(), z.copy()
        k = np.clip(np.searchsorted(self.knots, t, side="right") - 1, 0, p - 1)
        tau = np.maximum(t - self.knots[k], 0.0)
        j = self.jerk[k]
        a0, v0, q0 = self.a0[k], self.v0[k], self.q0[k]
        after = t > self.knots[-1]
        if after.any():  # continue at the end speed, no acceleration
            te = self.knots[-1] - self.knots[k[after]]
            qe = q0[after] + v0[after] * te + a0[after] * te**2 / 2 + j[after] * te**3 / 6
            ve = v0[after] + a0[after] * te + j[after] * te**2 / 2
            tau[after] = t[after] - self.knots[-1]
            q0, v0, a0, j = q0.copy(), v0.copy(), a0.copy(), j.copy()
            q0[after], v0[after], a0[after], j[after] = qe, ve, 0.0, 0.0
        before = t < 0.0
        if before.any():
            q0, v0, a0, j = q0.copy(), v0.copy(), a0.copy(), j.copy()
            tau[before] = t[before]
            q0[before], v0[before], a0[before], j[before] = self.q0[0], self.v0[0], 0.0, 0.0
        a = a0 + j * tau
        v = v0 + a0 * tau + j * tau**2 / 2
        q = q0 + v0 * tau + a0 * tau**2 / 2 + j * tau**3 / 6
        return q, v, a, j


    def integral(self, t: np.ndarray) -> np.ndarray:
        """Time integral of position from 0 to ``t``, shape (N,) [m s] (extended as sample)."""
        t = np.atleast_1d(np.asarray(t, dtype=np.float64))
        if len(self.jerk) == 0:
            return np.zeros_like(t)
        d = np.diff(self.knots)
        cum = np.concatenate([[0.0], np.cumsum(
            self.q0 * d + self.v0 * d**2 / 2 + self.a0 * d**3 / 6 + self.jerk * d**4 / 24)])
        p = len(self.jerk)
        k = np.clip(np.searchsorted(self.knots, t, side="right") - 1, 0, p - 1)
        tau = np.clip(t, 0.0, self.knots[-1]) - self.knots[k]
        out = (cum[k] + self.q0[k] * tau + self.v0[k] * tau**2 / 2 + self.a0[k] * tau**3 / 6
               + self.jerk[k] * tau**4 / 24)
        q_end, v_end, _, _ = self.sample(self.knots[-1:])
        late = np.maximum(t - self.knots[-1], 0.0)
        early = np.minimum(t, 0.0)
        return (out + q_end[0] * late + v_end[0] * late**2 / 2
                + self.q0[0] * early + self.v0[0] * early**2 / 2)

    def averaged(self, window: float, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Moving average over ``[t - window, t]`` of position, speed and acceleration.

        The averaged motion lasts ``duration + window``; its acceleration stays within
        the range of the original and its jerk is ``(a(t) - a(t - window)) / window``.

        Returns
        -------
        q, v, a : ndarray, each shape (N,)
        """
        t = np.atleast_1d(np.asarray(t, dtype=np.float64))
        if window <= 0.0:
            q, v, a, _ = self.sample(t)
            return q, v, a
        q1, v1, a1, _ = self.sample(t)
        q0, v0, a0, _ = self.sample(t - window)
        q = (self.integral(t) - self.integral(t - window)) / window
        return q, (q1 - q0) / window, (v1 - v0) / window

    def accel_change(self, window: float) -> float:
        """Largest ``|a(t) - a(t - window)|`` over all t (exact for piecewise-constant a)."""
        if len(self.jerk) == 0:
            return 0.0
        if np.any(self.jerk != 0.0):
            raise PlanError("Profile.accel_change: needs a profile of constant-acceleration "
                            "phases, got one with jerk")
        cuts = np.unique(np.concatenate([self.knots, self.knots + window]))
        mids = np.concatenate([[cuts[0] - 1.0], 0.5 * (cuts[1:] + cuts[:-1]), [cuts[-1] + 1.0]])
        _, _, a1, _ = self.sample(mids)  # zero outside [0, duration]
        _, _, a0, _ = self.sample(mids - window)
        return float(np.max(np.abs(a1 - a0)))


def piecewise_profile(
    q: np.ndarray, v: np.ndarray, accel: np.ndarray, durations: np.ndarray
) -> Profile:
    """A profile of constant-acceleration phases.

    Parameters
    ----------
    q, v : ndarray, shape (P,) — position [m] and speed [m/s] at the start of each phase
    accel, durations : ndarray, shape (P,) — [m/s^2], [s]
    """
    d = np.asarray(durations, dtype=np.float64)
    knots = np.concatenate([[0.0], np.cumsum(d)])
    return Profile(knots, np.zeros(len(d)), np.asarray(q, dtype=np.float64),
                   np.asarray(v, dtype=np.float64), np.asarray(accel, dtype=np.float64))


def _build(durations, accels, jerks, v_start, sign, timings, peak) -> Profile:
    """Integrate phases (duration, acceleration at start, jerk) into a :class:`Profile`."""
    keep = [i for i, d in enumerate(durations) if d > 0.0]
    dur = np.array([durations[i] for i in keep], dtype=np.float64)
    a0 = np.array([accels[i] for i in keep], dtype=np.float64)
    jk = np.array([jerks[i] for i in keep], dtype=np.float64)
    q0 = np.zeros(len(keep))
    v0 = np.zeros(len(keep))
    q, v = 0.0, v_start
    for i, d in enumerate(dur):
        q0[i], v0[i] = q, v
        q += v * d + a0[i] * d**2 / 2 + jk[i] * d**3 / 6
        v += a0[i] * d + jk[i] * d**2 / 2
    knots = np.concatenate([[0.0], np.cumsum(dur)])
    return Profile(knots, sign * jk, sign * q0, sign * v0, sign * a0, timings, sign * peak)


def _check(where: str, **values: float) -> None:
    for key, value in values.items():
        if not np.isfinite(value) or value <= 0.0:
            raise PlanError(f"{where}: {key} must be > 0, got {value!r}")


def _orient(where, distance, v0, v1, max_speed):
    sign = -1.0 if distance < 0.0 or (distance == 0.0 and v0 + v1 < 0.0) else 1.0
    h, v0, v1 = sign * distance, sign * v0, sign * v1
    for key, v in (("start_speed", v0), ("end_speed", v1)):
        if v < 0.0 or v > max_speed * (1.0 + 1e-12):
            raise PlanError(
                f"{where}: {key} must be between 0 and max_speed ({max_speed:g}) towards the "
                f"goal, got {sign * v:g}"
            )
    return sign, h, min(v0, max_speed), min(v1, max_speed)


def trapezoidal_profile(
    distance: float,
    *,
    max_speed: float,
    max_accel: float,
    max_decel: float | None = None,
    start_speed: float = 0.0,
    end_speed: float = 0.0,
) -> Profile:
    """Least-time trapezoidal (or triangular) speed profile over a distance.

    Parameters
    ----------
    distance : float — signed distance [m]
    max_speed, max_accel : float — [m/s], [m/s^2]
    max_decel : float, optional — braking limit [m/s^2] (default ``max_accel``)
    start_speed, end_speed : float — [m/s], same sign as ``distance``

    Returns
    -------
    Profile
        ``timings``: ``accel``, ``cruise`` (0 in the triangular case), ``decel``.

    Raises
    ------
    PlanError
        For non-positive limits, or when the end speed cannot be reached within the distance.

    Examples
    --------
    >>> p = trapezoidal_profile(1.0, max_speed=1.0, max_accel=2.0)
    >>> round(p.duration, 6)   # 1/1 + 1/2
    1.5
    """
    where = "trapezoidal_profile"
    d = max_accel if max_decel is None else max_decel
    _check(where, max_speed=max_speed, max_accel=max_accel, max_decel=d)
    a, vm = max_accel, max_speed
    sign, h, v0, v1 = _orient(where, distance, start_speed, end_speed, vm)
    if v1 > v0 and 2.0 * a * h < v1**2 - v0**2 * (1.0 - 1e-12):
        raise PlanError(f"{where}: distance must be >= {(v1**2 - v0**2) / (2 * a):g} m to "
                        f"reach end_speed {v1:g}, got {h:g}")
    if v0 > v1 and 2.0 * d * h < (v0**2 - v1**2) * (1.0 - 1e-12):
        raise PlanError(f"{where}: distance must be >= {(v0**2 - v1**2) / (2 * d):g} m to "
                        f"brake to end_speed {v1:g}, got {h:g}")
    # peak speed when accelerating at a then braking at d with no cruise:
    # (vp^2 - v0^2) / 2a + (vp^2 - v1^2) / 2d = h
    vp = np.sqrt(max((2.0 * a * d * h + d * v0**2 + a * v1**2) / (a + d), max(v0, v1) ** 2))
    if vp >= vm:
        ta, td = (vm - v0) / a, (vm - v1) / d
        tv = (h - (vm**2 - v0**2) / (2 * a) - (vm**2 - v1**2) / (2 * d)) / vm
        vp = vm
    else:
        ta, td, tv = (vp - v0) / a, (vp - v1) / d, 0.0
    timings = {"accel": ta, "cruise": max(tv, 0.0), "decel": td}
    return _build([ta, tv, td], [a, 0.0, -d], [0.0, 0.0, 0.0], v0, sign, timings, vp)


def _speed_change(dv: float, acc: float, jerk: float) -> tuple[float, float]:
    """Least time to change speed by ``dv >= 0`` with limits: (total time, jerk time)."""
    if dv * jerk >= acc * acc:
        return acc / jerk + dv / acc, acc / jerk
    tj = np.sqrt(dv / jerk)
    return 2.0 * tj, tj


def s_curve_profile(
    distance: float,
    *,
    max_speed: float,
    max_accel: float,
    max_jerk: float,
    max_decel: float | None = None,
    start_speed: float = 0.0,
    end_speed: float = 0.0,
) -> Profile:
    """Least-time jerk-limited ("double S", seven-phase) speed profile over a distance.

    The phases: jerk up, constant acceleration, jerk down, cruise, jerk down, constant
    braking, jerk up. The constant-acceleration phases vanish when the speed change is
    too small to reach the acceleration limit, the cruise when the distance is too short
    to reach ``max_speed``.

    Parameters
    ----------
    distance : float — signed distance [m]
    max_speed, max_accel, max_jerk : float — [m/s], [m/s^2], [m/s^3]
    max_decel : float, optional — braking limit [m/s^2] (default ``max_accel``)
    start_speed, end_speed : float — [m/s], same sign as ``distance``

    Returns
    -------
    Profile
        ``timings``: ``accel`` (Ta), ``cruise`` (Tv), ``decel`` (Td), ``accel_jerk`` (Tj1),
        ``decel_jerk`` (Tj2), in the notation of Biagiotti & Melchiorri (2008) §3.4.

    Raises
    ------
    PlanError
        For non-positive limits, or when the end speed cannot be reached within the distance.

    Examples
    --------
    >>> p = s_curve_profile(10.0, max_speed=1.0, max_accel=1.0, max_jerk=10.0)
    >>> round(p.duration, 6)   # h/v + v/a + a/j
    11.1
    """
    where = "s_curve_profile"
    d = max_accel if max_decel is None else max_decel
    _check(where, max_speed=max_speed, max_accel=max_accel, max_decel=d, max_jerk=max_jerk)
    a, j, vm = max_accel, max_jerk, max_speed
    sign, h, v0, v1 = _orient(where, distance, start_speed, end_speed, vm)

    def covered(vl: float) -> float:
        # each speed change has a symmetric acceleration pulse: mean speed (vs + ve) / 2
        ta, _ = _speed_change(vl - v0, a, j)
        td, _ = _speed_change(vl - v1, d, j)
        return (v0 + vl) / 2.0 * ta + (vl + v1) / 2.0 * td

    v_lo = max(v0, v1)
    need = covered(v_lo)
    if need > h * (1.0 + 1e-12) + 1e-15:
        raise PlanError(f"{where}: distance must be >= {need:g} m to go from start_speed "
                        f"{v0:g} to end_speed {v1:g}, got {h:g}")
    if covered(vm) <= h:
        vl = vm
        tv = (h - covered(vm)) / vm
    else:
        vl = v_lo if need >= h else brentq(lambda v: covered(v) - h, v_lo, vm,
                                           xtol=1e-15, rtol=1e-15, maxiter=200)
        tv = 0.0
    ta, tj1 = _speed_change(vl - v0, a, j)
    td, tj2 = _speed_change(vl - v1, d, j)
    a_lim, d_lim = j * tj1, j * tj2
    timings = {"accel": ta, "cruise": tv, "decel": td, "accel_jerk": tj1, "decel_jerk": tj2}
    return _build(
        [tj1, ta - 2 * tj1, tj1, tv, tj2, td - 2 * tj2, tj2],
        [0.0, a_lim, a_lim, 0.0, 0.0, -d_lim, -d_lim],
        [j, 0.0, -j, 0.0, -j, 0.0, j],
        v0, sign, timings, vl,
    )
