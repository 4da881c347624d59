"""Steady state of the ``kalman`` estimator's heading/gyro-bias filter, from sensor figures.

Design arithmetic for ``skidpad gains`` (the wheel-loop and tracker gains are in
:mod:`planners.gains`): per-sample gyro noise from its noise density, and the filtering
DARE solved for the estimator's own model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planners.filters import lift, steady_gain


def gyro_tick_sigma(rate_noise: float, sample_period: float) -> float:
    """Standard deviation of one gyro sample from its white rate noise density.

    A sample averages the rate over ``T_s``; white noise of density ``N`` gives it the
    standard deviation ``N / sqrt(T_s)`` (IEEE Std 952-1997, angle random walk).

    Parameters
    ----------
    rate_noise : float — N [rad/s/sqrt(Hz)]
    sample_period : float — T_s [s], > 0

    Returns
    -------
    float — [rad/s]
    """
    return float(rate_noise / np.sqrt(sample_period))


@dataclass(frozen=True)
class HeadingGain:
    """Steady state of the heading/gyro-bias Kalman filter.

    Attributes
    ----------
    f : ndarray (2, 2); q : ndarray (2, 2); h : ndarray (1, 2); r : ndarray (1, 1)
        The model between two measurements (``every`` ticks)
    prior : ndarray (2, 2) — covariance just before a measurement [rad^2, rad^2/s, rad^2/s^2]
    posterior : ndarray (2, 2) — covariance just after it
    gain : ndarray (2, 1) — K = P H' (H P H' + R)^-1 [-, 1/s]
    """

    f: np.ndarray
    q: np.ndarray
    h: np.ndarray
    r: np.ndarray
    prior: np.ndarray
    posterior: np.ndarray
    gain: np.ndarray

    @property
    def heading_sigma(self) -> tuple[float, float]:
        """Heading standard deviation before and after a measurement [rad]."""
        return float(np.sqrt(self.prior[0, 0])), float(np.sqrt(self.posterior[0, 0]))


def heading_kalman(
    *, dt: float, gyro_sigma: float, bias_walk: float, sigma: float, every: int = 1
) -> HeadingGain:
    """Steady-state gain of the ``kalman`` estimator's filter on ``[heading, gyro bias]``.

    The estimator's model per tick ``T`` (:mod:`planners.estimators.kalman`):
    ``F = [[1, -T], [0, 1]]``, ``Q = diag((gyro_sigma T)^2, bias_walk^2 T)``,
    ``H = [1, 0]``, ``R = sigma^2``. With a measurement every ``M = every`` ticks the model
    between measurements is ``F^M`` and ``sum_i F^i Q F^i'`` (i < M). The filtering DARE
    (the dual of the LQR one) gives the prior ``P``; ``K = P H' (H P H' + R)^-1`` and the
    posterior ``(I - K H) P``. A measurement noise of zero is floored at 1e-12 rad^2, as the
    estimator's steady mode does.

    Parameters
    ----------
    dt : float — control tick T [s]
    gyro_sigma : float — gyro rate noise per tick [rad/s] (:func:`gyro_tick_sigma`)
    bias_walk : float — bias random walk [rad/s/sqrt(s)]
    sigma : float — heading measurement noise [rad]
    every : int — ticks between measurements, >= 1

    Returns
    -------
    HeadingGain
    """
    f1 = np.array([[1.0, -dt], [0.0, 1.0]])
    q1 = np.diag([(gyro_sigma * dt) ** 2, bias_walk**2 * dt])
    f, q = lift(f1, q1, every)
    h = np.array([[1.0, 0.0]])
    r = np.array([[max(sigma**2, 1e-12)]])
    gain, prior = steady_gain(f, h, q, r)
    posterior = (np.eye(2) - gain @ h) @ prior
    return HeadingGain(f=f, q=q, h=h, r=r, prior=prior, posterior=posterior, gain=gain)
