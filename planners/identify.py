"""Fit wheel feedforward constants kS, kV, kA from a robot log (robot-side, no simulator).

Model, per wheel label (a side of a skid or differential chassis, a mecanum wheel), at every
kept sample::

    u = kS sign(v) + kV v + kA a            u [V], v [rad/s], a [rad/s^2] at the wheel shaft

fitted by ordinary least squares, per wheel and pooled (the samples of every wheel stacked).

Signals. ``u`` is ``voltage_<w>`` or ``duty_<w> x battery`` (:meth:`RobotLog.wheel_voltage`).
``v`` and ``a`` come from one Savitzky-Golay filter (:func:`scipy.signal.savgol_filter`,
``delta = dt``): derivatives 1 and 2 of the encoder position, or derivatives 0 and 1 of a
logged ``velocity_<w>`` when every wheel has one. The default :class:`Smoother` is a 0.15 s
window (31 samples at 200 Hz) with polynomial order 4. Order 4 reproduces the t^4 term of a
first-order step response, so the second derivative of a response with time constant
tau ~ 0.07-0.1 s is barely biased by the local fit (orders 2-3 bias kA by 2-6 % on the
bundled characterisation logs). The window is as long as it is because the noise left in
``a`` (encoder quantisation, differentiated twice) sits in a regressor and attenuates kA
(errors in variables): on the bundled logs kA came out 0.0 % / -0.4 % (skid / mecanum) off
the motor model at 0.15 s, -1 % at 0.12 s and -16 % / -25 % at 0.06 s. Encoder read jitter
makes this worse and the standard errors do not show it: with 0.5 counts of jitter kA came out
-0.5 % / -2.5 % at 0.15 s (-0.3 % / -0.8 % at 0.2 s), with 2 counts -8 % / -30 % (-4 % / -14 %
at 0.2 s). On noisy encoders use a longer window and longer holds between steps.

Kept samples (the rest are dropped before the fit, and counted):

* ``|v| >= min_speed`` (default 5 % of the wheel's peak speed), and no slower sample within
  half a window: near standstill sign(v) is undefined and static friction, not kS, holds the
  wheel, and a window that reaches a stop or a reversal spans the kink in v there;
* not within half a window of a voltage step (``|du| > step_fraction`` x peak |u| between two
  rows) nor of either end of the log: the polynomial fit spans the kink in v there, so a is
  smeared across the step;
* ``u``, ``v`` finite.

Time must be evenly sampled for the filter. Logs with jitter (steps that differ from the median
by more than 1 %) are resampled onto the median step: positions and speeds linearly, voltages
as held (zero-order hold, the way a motor controller applies them). A step longer than three
median steps is refused: split the log there.

Procedure: a quasi-static ramp (small voltage steps, each held until the speed settles) pins
kS and kV; steps pin kA. Keep each step's launch within the wheels' grip: a wheel that spins
accelerates faster than the chassis it is meant to push, and kA reads low.

kA is reported as *not separable* when its relative standard error exceeds
``max_ka_rel_se`` (default 0.2, i.e. a 95 % interval wider than about +-40 % of kA) or the
estimate is not positive: the log then has too little acceleration against its noise (a
quasi-static ramp alone), and a step test is needed.

Source: the model and the ramp-and-step procedure are common practice for DC drive
characterisation, no source; ordinary least squares and its covariance sigma^2 (X'X)^-1 with
sigma^2 = RSS / (n - p): any regression text (e.g. Montgomery, Peck & Vining, *Introduction to
Linear Regression Analysis*, 5th ed. 2012, §3.2 and §3.3); Savitzky & Golay, *Anal. Chem.* 36
(1964) 1627, as implemented by scipy.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.signal

from planners.errors import LogError, ScenarioError
from planners.robot_log import RobotLog

NAMES = ("kS", "kV", "kA")
UNITS = {
    "kS": "V", "kV": "V s/rad", "kA": "V s^2/rad", "v": "rad/s (wheel shaft)", "a": "rad/s^2 (wheel shaft)",
}


@dataclass(frozen=True)
class Smoother:
    """Savitzky-Golay smoothing-differentiating filter settings.

    Attributes
    ----------
    window : float — window length [s]; rounded to an odd number of samples, at least order + 3
    order : int — polynomial order
    """

    window: float = 0.15
    order: int = 4

    def __post_init__(self) -> None:
        if not self.window > 0.0:
            raise ScenarioError(f"smoother: window must be > 0 s, got {self.window!r}")
        if isinstance(self.order, bool) or not isinstance(self.order, int) or self.order < 2:
            raise ScenarioError(f"smoother: order must be an integer >= 2 (a needs a second derivative), got {self.order!r}")

    def samples(self, dt: float) -> int:
        """Odd window length in samples at sample period ``dt`` [s]."""
        n = round(self.window / dt)
        n += 1 - n % 2
        return max(n, self.order + 3 - (self.order % 2))


@dataclass(frozen=True)
class ConstantsFit:
    """One least-squares fit of u = kS sign(v) + kV v + kA a.

    Attributes
    ----------
    coef, se : ndarray, shape (3,) — kS [V], kV [V s/rad], kA [V s^2/rad] and standard errors
    cov : ndarray, shape (3, 3) — sigma^2 (X'X)^-1
    r2 : float — 1 - RSS / sum((u - mean u)^2)
    residuals : ndarray, shape (n,) — u - X coef [V]
    n : int — samples used
    ka_separable : bool — see the module docstring
    """

    coef: np.ndarray
    se: np.ndarray
    cov: np.ndarray
    r2: float
    residuals: np.ndarray
    n: int
    ka_separable: bool

    kS = property(lambda self: float(self.coef[0]), doc="kS [V]")
    kV = property(lambda self: float(self.coef[1]), doc="kV [V s/rad]")
    kA = property(lambda self: float(self.coef[2]), doc="kA [V s^2/rad]")
    kS_se = property(lambda self: float(self.se[0]), doc="standard error of kS [V]")
    kV_se = property(lambda self: float(self.se[1]), doc="standard error of kV [V s/rad]")
    kA_se = property(lambda self: float(self.se[2]), doc="standard error of kA [V s^2/rad]")

    @property
    def dof(self) -> int:
        """Residual degrees of freedom n - 3."""
        return self.n - 3

    def as_dict(self) -> dict[str, float | int | bool]:
        """kS, kV, kA, their ``_se``, ``r2``, ``n`` and ``ka_separable``, JSON-ready."""
        out: dict[str, float | int | bool] = {k: float(c) for k, c in zip(NAMES, self.coef)}
        out.update({f"{k}_se": float(s) for k, s in zip(NAMES, self.se)})
        out.update(r2=float(self.r2), n=int(self.n), ka_separable=bool(self.ka_separable))
        return out


@dataclass(frozen=True)
class WheelFit:
    """The fit of one wheel label and the samples it used (for residual plots).

    t, u, v, a : ndarray, shape (n,) — kept samples: time [s], voltage [V], speed, acceleration
    """

    label: str
    fit: ConstantsFit
    t: np.ndarray
    u: np.ndarray
    v: np.ndarray
    a: np.ndarray


@dataclass(frozen=True)
class FeedforwardFit:
    """Per-wheel and pooled fits of a log, with the settings used."""

    wheels: dict[str, WheelFit]
    pooled: ConstantsFit
    smoother: Smoother
    dt: float
    window_samples: int
    signal: str
    dropped: int
    notes: list[str] = field(default_factory=list)


def design_matrix(v: np.ndarray, a: np.ndarray) -> np.ndarray:
    """Columns sign(v), v, a, shape (n, 3)."""
    return np.column_stack([np.sign(v), v, a])


def fit_constants(u: np.ndarray, v: np.ndarray, a: np.ndarray, *, max_ka_rel_se: float = 0.2) -> ConstantsFit:
    """Ordinary least squares of u on [sign(v), v, a] by QR.

    Parameters
    ----------
    u, v, a : ndarray, shape (n,) — voltage [V], speed [rad/s], acceleration [rad/s^2]
    max_ka_rel_se : float — kA is not separable above this relative standard error

    Raises
    ------
    LogError — fewer than 4 samples, or the columns are linearly dependent (e.g. one speed only)
    """
    x = design_matrix(np.asarray(v, float), np.asarray(a, float))
    u = np.asarray(u, dtype=np.float64)
    n = len(u)
    if n < 4:
        raise LogError(f"feedforward fit needs at least 4 samples away from standstill and steps, got {n}")
    if np.linalg.matrix_rank(x) < 3:
        raise LogError("feedforward fit: sign(v), v and a are linearly dependent (drive several speeds, both ways)")
    q, r = np.linalg.qr(x)
    r_inv = np.linalg.inv(r)  # 3 x 3 upper triangular
    coef = r_inv @ (q.T @ u)
    residuals = u - x @ coef
    sigma2 = float(residuals @ residuals) / (n - 3)
    cov = sigma2 * (r_inv @ r_inv.T)  # sigma^2 (X'X)^-1 = sigma^2 R^-1 R^-T
    se = np.sqrt(np.diag(cov))
    tss = float(np.sum((u - u.mean()) ** 2))
    r2 = 1.0 - float(residuals @ residuals) / tss if tss > 0 else float("nan")
    separable = bool(coef[2] > 0 and se[2] <= max_ka_rel_se * coef[2])
    return ConstantsFit(coef=coef, se=se, cov=cov, r2=r2, residuals=residuals, n=n, ka_separable=separable)


def _uniform(log: RobotLog, t: np.ndarray, keep: np.ndarray) -> tuple[np.ndarray, float, bool]:
    """Uniform time grid over the rows ``keep``: (grid, dt, resampled)."""
    tt = t[keep]
    step = np.diff(tt)
    dt = float(np.median(step))
    worst = int(np.argmax(step))
    if step[worst] > 3.0 * dt:
        row = int(log.rows[np.flatnonzero(keep)[worst + 1]]) if log.rows is not None else worst + 1
        raise LogError(
            f"{log.source}: row {row}: step of {step[worst]:g} s between usable samples is more than "
            f"3 x the median {dt:g} s; identify needs evenly sampled rows (split the log there)"
        )
    if np.max(np.abs(step - dt)) <= 0.01 * dt:
        return tt, dt, False
    count = int(np.floor((tt[-1] - tt[0]) / dt + 1e-9)) + 1
    return tt[0] + dt * np.arange(count), dt, True


def fit_feedforward(
    log: RobotLog,
    *,
    smoother: Smoother = Smoother(),
    min_speed: float | None = None,
    step_fraction: float = 0.02,
    max_ka_rel_se: float = 0.2,
    wheels: tuple[str, ...] | None = None,
) -> FeedforwardFit:
    """Fit kS, kV, kA per wheel label and pooled (see the module docstring).

    Parameters
    ----------
    log : RobotLog
    smoother : Smoother — Savitzky-Golay window [s] and order
    min_speed : float, optional — drop samples slower than this [rad/s]; default 5 % of each
        wheel's peak speed
    step_fraction : float — a voltage change between rows larger than this fraction of the
        peak |u| is a step
    max_ka_rel_se : float — kA separability threshold on SE / kA
    wheels : tuple of str, optional — labels to fit (default all); pooled uses these

    Returns
    -------
    FeedforwardFit

    Raises
    ------
    LogError — no wheel columns, an unknown label, uneven sampling, too few usable samples
    """
    if not log.wheels:
        raise LogError(f"{log.source}: needs wheel columns (duty_<w>/voltage_<w> and position_<w> or velocity_<w>)")
    labels = log.wheels if wheels is None else tuple(wheels)
    for w in labels:
        if w not in log.wheels:
            raise LogError(f"{log.source}: wheel must be one of {', '.join(log.wheels)}, got {w!r}")
    idx = [log.wheels.index(w) for w in labels]
    u_all = log.wheel_voltage()[:, idx]
    logged = log.wheel_velocity()
    signal = "velocity" if logged is not None else "position"
    y_all = (logged if logged is not None else log.wheel_position())[:, idx]
    keep = np.all(np.isfinite(u_all), axis=1) & np.all(np.isfinite(y_all), axis=1)
    if keep.sum() < 2:
        raise LogError(f"{log.source}: no rows with both voltage and {signal} for every wheel")
    grid, dt, resampled = _uniform(log, log.t, keep)
    n_win = smoother.samples(dt)
    if len(grid) < 3 * n_win:
        raise LogError(
            f"{log.source}: {len(grid)} usable samples; the {smoother.window:g} s smoothing window needs "
            f"at least {3 * n_win}"
        )
    tk = log.t[keep]
    notes = [f"resampled onto an even {dt:g} s grid (time steps varied by more than 1 %)"] if resampled else []
    half = n_win // 2
    fits: dict[str, WheelFit] = {}
    pooled: list[list[np.ndarray]] = [[], [], []]
    dropped = 0
    for j, w in enumerate(labels):
        y = np.interp(grid, tk, y_all[keep, j])
        u = u_all[keep, j][np.clip(np.searchsorted(tk, grid + 1e-9 * dt, side="right") - 1, 0, len(tk) - 1)]
        d0 = 1 if signal == "position" else 0
        v = scipy.signal.savgol_filter(y, n_win, smoother.order, deriv=d0, delta=dt)
        a = scipy.signal.savgol_filter(y, n_win, smoother.order, deriv=d0 + 1, delta=dt)
        near = np.zeros(len(grid), dtype=bool)
        near[:half] = near[-half:] = True
        step = np.flatnonzero(np.abs(np.diff(u)) > step_fraction * np.max(np.abs(u))) + 1
        for s in step:  # samples whose window spans the step at index s (between s-1 and s)
            near[max(s - half, 0): s + half] = True
        floor = 0.05 * np.max(np.abs(v)) if min_speed is None else float(min_speed)
        # windows that reach a slow sample span a stop or a reversal, where a has a kink
        slow = np.convolve(np.abs(v) < floor, np.ones(2 * half + 1), mode="same") > 0
        use = ~near & ~slow & np.isfinite(u) & np.isfinite(v) & np.isfinite(a)
        dropped += int(np.sum(~use))
        try:
            fit = fit_constants(u[use], v[use], a[use], max_ka_rel_se=max_ka_rel_se)
        except LogError as exc:
            raise LogError(f"{log.source}: wheel {w!r}: {exc}") from None
        fits[w] = WheelFit(label=w, fit=fit, t=grid[use], u=u[use], v=v[use], a=a[use])
        for lst, arr in zip(pooled, (u, v, a)):
            lst.append(arr[use])
    pool = fit_constants(*(np.concatenate(p) for p in pooled), max_ka_rel_se=max_ka_rel_se)
    # (the pooled fit cannot fail where every wheel's fit succeeded)
    return FeedforwardFit(
        wheels=fits, pooled=pool, smoother=smoother, dt=dt, window_samples=n_win, signal=signal,
        dropped=dropped, notes=notes,
    )
