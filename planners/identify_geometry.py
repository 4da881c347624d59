"""Effective track width from a spin-in-place log: encoder distance against IMU yaw.

A skid or differential chassis turning with wheel speeds ``w_l``, ``w_r`` yaws at
``omega = r (w_r - w_l) / b`` (Lynch & Park, *Modern Robotics*, 2017, §13.3), so over any
stretch of a log the differential wheel travel and the yaw change are proportional,

    r_r phi_r - r_l phi_l = b_eff (psi - psi_0),

with ``phi`` the cumulative shaft angles and ``psi`` the IMU yaw. ``b_eff`` is fitted by
least squares through the origin on the cumulative values (:func:`numpy.linalg.lstsq`).
On a differential chassis it is close to the wheel spacing; on a skid-steer chassis the
wheels scrub sideways while the robot turns and ``b_eff`` is larger than the physical
track. Mandow et al., "Experimental kinematics for wheeled skid-steer mobile robots",
IROS 2007, describe this as an expansion of the instantaneous centres of rotation of the
two sides by a factor chi > 1 (value from memory: of the order of 1.5 on their platform
and floors); that is the number to put in the odometry and the tracker, not the tape
measure's.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.integrate import cumulative_trapezoid

from planners.errors import LogError
from planners.robot_log import RobotLog

#: the least turn a spin log must contain [rad]
MIN_TURN = np.pi


@dataclass(frozen=True)
class TrackWidthFit:
    """What a spin-in-place log says about the effective track.

    Attributes
    ----------
    track : float — effective track b_eff [m]
    se : float — standard error of ``track`` [m] (from the residuals, taken as independent;
        cumulative data are correlated, so read it as a lower bound)
    r2 : float — coefficient of determination of the fit (about the mean of the data)
    turn : float — total yaw change covered by the fit [rad] (signed, unwrapped)
    samples : int — samples used
    yaw_source : str — ``"yaw"`` (logged heading) or ``"yaw_rate"`` (integrated rate)
    wheel_radius : tuple of 2 float — left and right radii used [m]
    nominal_track : float or None — the log's ``track`` metadata [m], when given
    forward_ratio : float — |forward travel| / |differential travel| over the log (0 for a
        clean spin in place)
    yaw, differential : ndarray, shape (S,) — the fitted data: yaw change [rad] and
        differential wheel travel [m]
    """

    track: float
    se: float
    r2: float
    turn: float
    samples: int
    yaw_source: str
    wheel_radius: tuple[float, float]
    nominal_track: float | None
    forward_ratio: float
    yaw: np.ndarray
    differential: np.ndarray

    @property
    def expansion(self) -> float | None:
        """``track / nominal_track`` (Mandow et al.'s expansion factor), or None."""
        return None if self.nominal_track is None else self.track / self.nominal_track

    def as_dict(self) -> dict:
        """The figures as plain numbers (for JSON)."""
        return {
            "track_m": self.track, "track_se_m": self.se, "r2": self.r2, "turn_rad": self.turn,
            "samples": self.samples, "yaw_source": self.yaw_source,
            "wheel_radius_m": list(self.wheel_radius), "nominal_track_m": self.nominal_track,
            "expansion": self.expansion, "forward_ratio": self.forward_ratio,
        }


def _meta_number(log: RobotLog, key: str) -> float | None:
    if key not in log.meta:
        return None
    try:
        value = float(log.meta[key])
    except ValueError:
        value = float("nan")
    if not value > 0.0:
        raise LogError(f"{log.source}: metadata {key} must be a positive number, got {log.meta[key]!r}")
    return value


def radius_scale(source: str, meta: dict[str, str]) -> tuple[float, float]:
    """Metadata ``radius_scale = left, right`` (default 1, 1).

    Raises
    ------
    LogError — not two positive numbers
    """
    if "radius_scale" not in meta:
        return (1.0, 1.0)
    try:
        scale = tuple(float(v) for v in meta["radius_scale"].split(","))
    except ValueError:
        scale = ()
    if len(scale) != 2 or not all(v > 0.0 for v in scale):
        raise LogError(f"{source}: metadata radius_scale must be two positive numbers 'left, right', "
                       f"got {meta['radius_scale']!r}")
    return (scale[0], scale[1])


def side_radii(log: RobotLog, wheel_radius: float | None = None) -> tuple[float, float]:
    """Left and right wheel radii [m]: ``wheel_radius`` (argument, else metadata) times the
    metadata ``radius_scale = left, right`` when present.

    Raises
    ------
    LogError — no radius given or in the metadata, or a malformed ``radius_scale``
    """
    r = wheel_radius if wheel_radius is not None else _meta_number(log, "wheel_radius")
    if r is None or not r > 0.0:
        raise LogError(
            f"{log.source}: needs the wheel radius: metadata '# wheel_radius = <m>' or the "
            f"wheel_radius argument, got {r!r}"
        )
    scale = radius_scale(log.source, log.meta)
    return (r * scale[0], r * scale[1])


def _yaw(log: RobotLog) -> tuple[np.ndarray, str]:
    """IMU yaw (T,) [rad], unwrapped, NaN where not sampled; and which column it came from."""
    if log.has("yaw"):
        yaw = log.column("yaw").copy()
        ok = np.isfinite(yaw)
        yaw[ok] = np.unwrap(yaw[ok])
        return yaw, "yaw"
    rate = log.column("yaw_rate")
    ok = np.isfinite(rate)
    yaw = np.full_like(rate, np.nan)
    if ok.sum() >= 2:
        yaw[ok] = cumulative_trapezoid(rate[ok], log.t[ok], initial=0.0)
    return yaw, "yaw_rate"


def fit_track_width(log: RobotLog, *, wheel_radius: float | None = None) -> TrackWidthFit:
    """Fit the effective track of a skid or differential chassis from a spin-in-place log.

    Parameters
    ----------
    log : RobotLog — per-side wheel positions (``position_left``, ``position_right``) and
        IMU ``yaw`` or ``yaw_rate``; metadata ``wheel_radius`` unless given here
    wheel_radius : float, optional — wheel radius [m], overriding the metadata

    Returns
    -------
    TrackWidthFit

    Raises
    ------
    LogError
        For a log without per-side positions, IMU yaw or wheel radius, or one that turns less
        than half a revolution, or whose wheel travel and yaw disagree in sign.
    """
    if log.wheels != ("left", "right"):
        raise LogError(
            f"{log.source}: track width needs per-side wheel columns 'position_left', "
            f"'position_right', got wheels {', '.join(log.wheels) or 'none'}"
        )
    if not (log.has("yaw") or log.has("yaw_rate")):
        raise LogError(f"{log.source}: track width needs an IMU column 'yaw [rad]' or 'yaw_rate [rad/s]'")
    rl, rr = side_radii(log, wheel_radius)
    phi = log.wheel_position()
    yaw, source = _yaw(log)
    ok = np.isfinite(yaw) & np.all(np.isfinite(phi), axis=1)
    if ok.sum() < 3:
        raise LogError(f"{log.source}: track width needs at least 3 rows with both wheel positions and yaw, got {int(ok.sum())}")
    phi, yaw = phi[ok], yaw[ok]
    x = yaw - yaw[0]
    left, right = rl * (phi[:, 0] - phi[0, 0]), rr * (phi[:, 1] - phi[0, 1])
    y = right - left
    turn = float(x[-1])
    if np.max(np.abs(x)) < MIN_TURN:
        raise LogError(
            f"{log.source}: spin must turn at least {np.degrees(MIN_TURN):.0f} deg for a track fit, "
            f"got {np.degrees(np.max(np.abs(x))):.0f} deg"
        )
    # least squares through the origin: y = b x
    (b,), _, _, _ = np.linalg.lstsq(x[:, None], y, rcond=None)
    if not b > 0.0:
        raise LogError(
            f"{log.source}: track fit must be positive, got {b:.4g} m: the right-minus-left wheel "
            "travel and the yaw turn opposite ways (swapped sides or a reversed encoder or gyro?)"
        )
    resid = y - b * x
    n = len(x)
    se = float(np.sqrt(resid @ resid / max(n - 1, 1) / (x @ x)))
    ss_tot = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(resid @ resid) / ss_tot if ss_tot > 0 else float("nan")
    forward = 0.5 * (left + right)
    return TrackWidthFit(
        track=float(b), se=se, r2=r2, turn=turn,
        samples=n, yaw_source=source, wheel_radius=(rl, rr),
        nominal_track=_meta_number(log, "track"),
        forward_ratio=float(np.max(np.abs(forward)) / max(np.max(np.abs(y)), 1e-12)),
        yaw=x, differential=y,
    )
