"""Small batched filters used by the estimators: first-order low-pass and linear Kalman filter.

Both hold one row per robot (batch axis first) and take a mask of the rows that have a
new sample, so robots whose sensor did not report this tick keep their state.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg


def lowpass_coefficient(cutoff: float, dt: float) -> float:
    """``a = exp(-2 pi fc T)`` of the first-order low-pass ``y_k = a y_(k-1) + (1 - a) x_k``.

    Parameters
    ----------
    cutoff : float — fc [Hz], > 0
    dt : float — sample period T [s], > 0
    """
    if not cutoff > 0.0 or not dt > 0.0:
        raise ValueError(f"lowpass: cutoff and dt must be > 0, got {cutoff!r}, {dt!r}")
    # pole of the continuous RC filter, 1 / (2 pi fc), mapped by z = exp(sT)
    return float(np.exp(-2.0 * np.pi * cutoff * dt))


class LowPass:
    """First-order low-pass ``y_k = a y_(k-1) + (1 - a) x_k``, batched.

    Parameters
    ----------
    a : float — smoothing coefficient in [0, 1) (see :func:`lowpass_coefficient`)

    Examples
    --------
    >>> f = LowPass(a=0.5)
    >>> f.reset(np.zeros((1, 1)))
    >>> f.update(np.ones((1, 1)))
    array([[0.5]])
    """

    def __init__(self, *, a: float) -> None:
        if not 0.0 <= a < 1.0:
            raise ValueError(f"lowpass: a must be in [0, 1), got {a!r}")
        self.a = float(a)
        self.y = np.zeros((0, 1))

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


class LinearKalman:
    """Linear Kalman filter ``x' = F x + B u + w``, ``z = H x + v``, batched over N robots.

    Parameters
    ----------
    f : ndarray, shape (S, S); b : ndarray, shape (S, U); q : ndarray, shape (S, S)
    h : ndarray, shape (M, S); r : ndarray, shape (M, M)
    gain : ndarray, shape (S, M), optional
        A fixed (steady-state) gain; the covariance then follows that gain.
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
        self.x = self.x @ self.f.T + np.asarray(u, dtype=np.float64) @ self.b.T
        self.p = self.f @ self.p @ self.f.T + self.q

    def update(
        self, innovation: np.ndarray, mask: np.ndarray, *, r: np.ndarray | None = None,
        gain: np.ndarray | None = None,
    ) -> None:
        """Correct the rows in ``mask`` (N,) by ``innovation = z - H x`` (N, M).

        ``r`` (M, M) and ``gain`` (S, M) override the filter's own for this update.
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
        else:
            k = np.broadcast_to(gain, (p.shape[0],) + gain.shape)
        self.x[m] = self.x[m] + np.einsum("nij,nj->ni", k, innovation[m])
        # Joseph form P = (I-KH) P (I-KH)' + K R K': stays symmetric, valid for any gain
        a = np.eye(self.f.shape[0]) - k @ self.h
        self.p[m] = a @ p @ np.swapaxes(a, 1, 2) + k @ r @ np.swapaxes(k, 1, 2)
