"""Small batched filters used by the estimators and the wheel loop: first-order low-pass and
linear Kalman filter, with the steady-state Kalman gain for measurements at a lower rate.

The filters hold one row per robot (batch axis first) and take a mask of the rows that have
a new sample, so robots whose sensor did not report this tick keep their state. Rows are
computed one by one (no matrix product across the batch), so a robot's numbers do not
depend on its batch.

Sources: the first-order low-pass and its lag, Franklin, Powell, Workman, *Digital Control
of Dynamic Systems*, 3rd ed., 1998, ch. 6 (discrete equivalents: ``z = exp(sT)`` maps the
RC pole) and ch. 4 (frequency response of a discrete system); the Kalman filter and its
steady state, Simon, *Optimal State Estimation*, 2006, ch. 5 (the discrete filter, Joseph
form) and ch. 7 (steady-state filtering, the DARE; correlated process and measurement noise
in §7.1).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
from numba import njit


def lowpass_coefficient(cutoff: float, dt: float) -> float:
    """``a = exp(-2 pi fc T)`` of the first-order low-pass ``y_k = a y_(k-1) + (1 - a) x_k``.

    The pole ``-2 pi fc`` of the RC filter ``1 / (1 + s / (2 pi fc))`` mapped by
    ``z = exp(sT)`` (pole-zero matching, Franklin, Powell, Workman 1998, §6.3.2).

    Parameters
    ----------
    cutoff : float — fc [Hz], > 0
    dt : float — sample period T [s], > 0
    """
    if not cutoff > 0.0 or not dt > 0.0:
        raise ValueError(f"lowpass: cutoff and dt must be > 0, got {cutoff!r}, {dt!r}")
    return float(np.exp(-2.0 * np.pi * cutoff * dt))


def lowpass_lag(a: float, dt: float) -> float:
    """Delay [s] the first-order low-pass adds to a slow signal: ``a T / (1 - a)``.

    ``H(z) = (1 - a) / (1 - a z^-1)`` has phase ``-atan(a sin w / (1 - a cos w))`` and group
    delay ``tau(w) = a (cos w - a) / (1 - 2 a cos w + a^2)`` samples, which at ``w -> 0`` is
    ``a (1 - a) / (1 - a)^2 = a / (1 - a)``. A ramp ``x_k = k`` comes out as
    ``y_k = k - a / (1 - a)`` once the start has died away: the output is the input of
    ``a / (1 - a)`` samples ago. With ``a = exp(-2 pi fc T)`` it is ``T / (exp(2 pi fc T) - 1)
    = 1 / (2 pi fc) - T / 2 + ...``: the RC time constant less half a sample.

    Parameters
    ----------
    a : float — coefficient in [0, 1)
    dt : float — sample period T [s]
    """
    return float(a * dt / (1.0 - a))


def lowpass_from(
    *, a: float | None = None, cutoff: float | None = None, dt: float | None = None, where: str = "lowpass"
) -> float:
    """The coefficient from exactly one of ``a`` and ``cutoff`` (with ``dt``).

    Raises
    ------
    ValueError
        When both or neither are given, or a value is out of range.
    """
    if (a is None) == (cutoff is None):
        raise ValueError(f"{where}: give exactly one of a and cutoff, got a={a!r}, cutoff={cutoff!r}")
    if a is not None:
        if not 0.0 <= a < 1.0:
            raise ValueError(f"{where}: a must be in [0, 1), got {a!r}")
        return float(a)
    if dt is None:
        raise ValueError(f"{where}: cutoff needs the sample period dt, got None")
    return lowpass_coefficient(float(cutoff), float(dt))


@njit(cache=True)
def lowpass_kernel(y, x, a):
    """``y <- a y + (1 - a) x`` in place, every element of ``y`` (N, K), ``x`` (N, K)."""
    for i in range(y.shape[0]):
        for k in range(y.shape[1]):
            y[i, k] = a * y[i, k] + (1.0 - a) * x[i, k]


class LowPass:
    """First-order low-pass ``y_k = a y_(k-1) + (1 - a) x_k``, batched.

    Parameters
    ----------
    a : float, optional — smoothing coefficient in [0, 1)
    cutoff : float, optional — fc [Hz]; ``a = exp(-2 pi fc dt)`` (:func:`lowpass_coefficient`)
    dt : float, optional — sample period [s], needed with ``cutoff``

    Exactly one of ``a`` and ``cutoff``. A larger ``a`` (lower cutoff) passes less noise and
    adds more lag, :func:`lowpass_lag`.

    Examples
    --------
    >>> f = LowPass(a=0.5)
    >>> f.reset(np.zeros((1, 1)))
    >>> f.update(np.ones((1, 1)))
    array([[0.5]])
    """

    def __init__(self, *, a: float | None = None, cutoff: float | None = None, dt: float | None = None) -> None:
        self.a = lowpass_from(a=a, cutoff=cutoff, dt=dt)
        self.y = np.zeros((0, 1))

    @property
    def lag(self) -> float:
        """Low-frequency delay in samples, ``a / (1 - a)`` (:func:`lowpass_lag` with T = 1)."""
        return lowpass_lag(self.a, 1.0)

    def reset(self, y0: np.ndarray) -> None:
        """Start from ``y0`` (N, K)."""
        self.y = np.array(y0, dtype=np.float64)

    def update(self, x: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
        """Fold in samples ``x`` (N, K) for the rows in ``mask`` (N,) (all rows if None)."""
        new = self.a * self.y + (1.0 - self.a) * np.asarray(x, dtype=np.float64)
        self.y = new if mask is None else np.where(np.asarray(mask)[:, None], new, self.y)
        return self.y.copy()


def steady_gain(
    f: np.ndarray, h: np.ndarray, q: np.ndarray, r: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Steady-state Kalman gain and prior covariance from the discrete algebraic Riccati equation.

    ``P = F P F' - F P H' (H P H' + R)^-1 H P F' + Q`` (the filtering DARE, dual of the LQR
    one), ``K = P H' (H P H' + R)^-1``.

    Parameters
    ----------
    f : ndarray, shape (S, S); h : ndarray, shape (M, S); q : (S, S); r : (M, M)

    Returns
    -------
    gain : ndarray, shape (S, M); prior : ndarray, shape (S, S)
    """
    p = scipy.linalg.solve_discrete_are(f.T, h.T, q, r)
    k = p @ h.T @ np.linalg.inv(h @ p @ h.T + r)
    return k, p


def lift(f: np.ndarray, q: np.ndarray, every: int) -> tuple[np.ndarray, np.ndarray]:
    """The model over ``every`` ticks: ``F^M`` and ``sum_(i<M) F^i Q F^i'``.

    Parameters
    ----------
    f, q : ndarray, shape (S, S) — one tick's transition and process noise
    every : int — M >= 1
    """
    m = max(int(every), 1)
    fm = np.eye(f.shape[0])
    qm = np.zeros_like(q, dtype=np.float64)
    for _ in range(m):
        qm = f @ qm @ f.T + q
        fm = f @ fm
    return fm, qm


def periodic_gains(
    f: np.ndarray, q: np.ndarray, updates: list[list[tuple[np.ndarray, np.ndarray]]]
) -> tuple[np.ndarray, list[list[np.ndarray]]]:
    """Steady-state gains of a Kalman filter whose measurements repeat with a period of M ticks.

    Tick ``j`` of the period (``j = 0 .. M-1``) predicts, ``x' = F x``, ``P' = F P F' + Q``,
    then applies the measurements ``updates[j]`` = [(H, R), ...] one after another. The time-
    varying filter settles into a periodic gain (Simon 2006, ch. 7); it is found exactly by
    lifting one period into a time-invariant system with state ``x_k`` at tick 0 of the
    period (after its prediction): ``x_(k+M) = F^M x_k + W``, every measurement of the period
    ``z = H F^j x_k + H sum_(l<j) F^(j-1-l) w_l + v`` stacked into ``Z = C x_k + V``, where ``V``
    is correlated with ``W`` (``S = E[W V']``). The predictor DARE with that cross term,
    ``P = A P A' - (A P C' + S)(C P C' + R)^-1 (A P C' + S)' + Q_M`` (Simon 2006, §7.1;
    ``scipy.linalg.solve_discrete_are(A', C', Q_M, R, s=S)``), gives the prior at tick 0 of
    the period, and one period of the recursion from it gives every gain. With one
    measurement per period at tick 0 this is the DARE of the lifted model :func:`lift`.

    Parameters
    ----------
    f, q : ndarray, shape (S, S)
    updates : list of M lists of (H (1..Z, S), R (Z, Z)) — the measurements of each tick

    Returns
    -------
    prior : ndarray, shape (S, S) — covariance at tick 0 of the period before its updates
    gains : list of M lists of ndarray (S, Z) — the gain of every measurement, in order
    """
    f = np.asarray(f, dtype=np.float64)
    q = np.asarray(q, dtype=np.float64)
    period = len(updates)
    n = f.shape[0]
    powers = [np.linalg.matrix_power(f, i) for i in range(period + 1)]
    rows, blocks, ticks = [], [], []
    for j, tick in enumerate(updates):
        for h, r in tick:
            h = np.atleast_2d(np.asarray(h, dtype=np.float64))
            rows.append(h @ powers[j])
            blocks.append((h, np.atleast_2d(np.asarray(r, dtype=np.float64))))
            ticks.append(j)
    c = np.vstack(rows)
    sizes = [b[0].shape[0] for b in blocks]
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    r_lift = scipy.linalg.block_diag(*[b[1] for b in blocks])
    s_lift = np.zeros((n, offsets[-1]))
    # process noise w_l (l = 0 .. M-1) enters x_(k+M) through F^(M-1-l) and a measurement at
    # tick j > l through H F^(j-1-l)
    for a, (ha, _) in enumerate(blocks):
        ja = ticks[a]
        sa = slice(offsets[a], offsets[a + 1])
        for l in range(ja):
            s_lift[:, sa] += powers[period - 1 - l] @ q @ (ha @ powers[ja - 1 - l]).T
        for b in range(a, len(blocks)):
            hb, jb = blocks[b][0], ticks[b]
            sb = slice(offsets[b], offsets[b + 1])
            for l in range(min(ja, jb)):
                term = ha @ powers[ja - 1 - l] @ q @ (hb @ powers[jb - 1 - l]).T
                r_lift[sa, sb] += term
                if b != a:
                    r_lift[sb, sa] += term.T
    fm, qm = lift(f, q, period)
    prior = scipy.linalg.solve_discrete_are(fm.T, c.T, qm, r_lift, s=s_lift)
    p = prior.copy()
    gains: list[list[np.ndarray]] = []
    for j, tick in enumerate(updates):
        if j > 0:
            p = f @ p @ f.T + q
        here = []
        for h, r in tick:
            h = np.atleast_2d(np.asarray(h, dtype=np.float64))
            r = np.atleast_2d(np.asarray(r, dtype=np.float64))
            k = p @ h.T @ np.linalg.inv(h @ p @ h.T + r)
            a = np.eye(n) - k @ h
            p = a @ p @ a.T + k @ r @ k.T
            here.append(k)
        gains.append(here)
    return prior, gains


class LinearKalman:
    """Linear Kalman filter ``x' = F x + B u + w``, ``z = H x + v``, batched over N robots.

    Parameters
    ----------
    f : ndarray, shape (S, S); b : ndarray, shape (S, U); q : ndarray, shape (S, S)
    h : ndarray, shape (M, S); r : ndarray, shape (M, M)
    gain : ndarray, shape (S, M), optional
        A fixed (steady-state) gain; the covariance then follows that gain.

    The covariance update is the Joseph form ``P = (I-KH) P (I-KH)' + K R K'`` (Simon 2006,
    eq. 5.19), valid for any gain.
    """

    def __init__(self, *, f, b, q, h, r, gain: np.ndarray | None = None) -> None:
        self.f, self.b, self.q = (np.asarray(m, dtype=np.float64) for m in (f, b, q))
        self.h, self.r = np.asarray(h, dtype=np.float64), np.asarray(r, dtype=np.float64)
        self.gain = None if gain is None else np.asarray(gain, dtype=np.float64)
        s = self.f.shape[0]
        self.x = np.zeros((0, s))
        self.p = np.zeros((0, s, s))

    def reset(self, x0: np.ndarray, p0: np.ndarray) -> None:
        """Start from states ``x0`` (N, S) and covariances ``p0`` (N, S, S)."""
        self.x = np.array(x0, dtype=np.float64)
        self.p = np.array(p0, dtype=np.float64)

    def predict(self, u: np.ndarray) -> None:
        """``x = F x + B u``, ``P = F P F' + Q`` for inputs ``u`` (N, U)."""
        # row by row (einsum, not a matrix product over the batch)
        u = np.asarray(u, dtype=np.float64)
        self.x = np.einsum("ij,nj->ni", self.f, self.x) + np.einsum("ij,nj->ni", self.b, u)
        self.p = self.f @ self.p @ self.f.T + self.q

    def update(
        self, innovation: np.ndarray, mask: np.ndarray, *, r: np.ndarray | None = None,
        gain: np.ndarray | None = None,
    ) -> None:
        """Correct the rows in ``mask`` (N,) by ``innovation = z - H x`` (N, M).

        ``r`` (M, M) and ``gain`` (S, M), or one gain per robot (N, S, M), override the
        filter's own for this update.
        """
        m = np.asarray(mask, dtype=bool)
        if not m.any():
            return
        r = self.r if r is None else np.asarray(r, dtype=np.float64)
        gain = self.gain if gain is None else gain
        p = self.p[m]
        if gain is None:
            s = self.h @ p @ self.h.T + r
            k = p @ self.h.T @ np.linalg.inv(s)
        elif gain.ndim == 3:
            k = gain[m]
        else:
            k = np.broadcast_to(gain, (p.shape[0],) + gain.shape)
        self.x[m] = self.x[m] + np.einsum("nij,nj->ni", k, innovation[m])
        # Joseph form P = (I-KH) P (I-KH)' + K R K': stays symmetric, valid for any gain
        a = np.eye(self.f.shape[0]) - k @ self.h
        self.p[m] = a @ p @ np.swapaxes(a, 1, 2) + k @ r @ np.swapaxes(k, 1, 2)
