"""Odometry calibration of a differential (or skid) chassis by the UMBmark square test.

Borenstein & Feng, "Measurement and correction of systematic odometry errors in mobile
robots", IEEE Transactions on Robotics and Automation 12(6), 1996. The robot drives an
``L x L`` square by its odometry, ``n`` times clockwise and ``n`` times counter-clockwise,
and the true end position is measured. Two systematic errors explain the end errors to
first order:

* type A, an effective track differing from the nominal one: every 90 deg turn falls short
  by ``alpha``;
* type B, unequal wheel diameters: every straight leg bends into an arc of angle ``beta``.

In this module's frame (REP 103: start at the origin heading +x; counter-clockwise means
left turns) the end-error centres of gravity are, to first order,
``x_cw = -2L(alpha + beta)``, ``x_ccw = 2L(beta - alpha)``, hence the paper's

    alpha = (x_cw + x_ccw) / (-4L),      beta = (x_cw - x_ccw) / (-4L)
    R = (L / 2) / sin(beta / 2),         E_d = D_R / D_L = (R + b/2) / (R - b/2)
    E_b = 90 deg / (90 deg - alpha),     b_actual = E_b b_nominal

and the corrected wheel diameters keep the mean: ``D_L = 2 / (E_d + 1) D_a``,
``D_R = 2 / (1/E_d + 1) D_a``. The y centres of gravity give the same two angles,
``alpha = (y_cw - y_ccw) / (-4L)``, ``beta = (y_cw + y_ccw) / (-4L)`` (also the paper's).
The x and y forms err at second order in opposite directions, so this function uses
their mean (our choice; for a 3 % track and 0.5 % diameter error on a 4 m square it
recovers E_d - 1 to 0.1 % and E_b - 1 to 3 %, against 15 % from either form alone).
Errors are true minus odometry end position.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planners.errors import ScenarioError


@dataclass(frozen=True)
class UmbmarkCorrection:
    """What the square test says about the chassis.

    Attributes
    ----------
    alpha : float — turn shortfall per 90 deg turn [rad] (type A): mean of x and y forms
    beta : float — bend of each straight leg [rad] (type B, positive: curves left): mean
    alpha_x, beta_x, alpha_y, beta_y : float — the paper's x-based and y-based forms
    diameter_ratio : float — E_d = D_R / D_L, right over left wheel diameter
    track_scale : float — E_b = actual / nominal effective track
    track : float — corrected effective track E_b * b [m]
    left_scale, right_scale : float — multiply the nominal wheel diameter (or radius) of
        the left and right wheels by these (their mean is kept)
    e_max_syst : float — UMBmark measure of systematic odometry error: the larger distance
        of the cw and ccw centres of gravity from the start [m]
    """

    alpha: float
    beta: float
    alpha_x: float
    beta_x: float
    alpha_y: float
    beta_y: float
    diameter_ratio: float
    track_scale: float
    track: float
    left_scale: float
    right_scale: float
    e_max_syst: float


def _centre(errors: np.ndarray, name: str) -> np.ndarray:
    e = np.asarray(errors, dtype=np.float64)
    if e.ndim != 2 or e.shape[1] != 2 or e.shape[0] == 0 or not np.all(np.isfinite(e)):
        raise ScenarioError(
            f"umbmark: {name} must be finite end errors of shape (n, 2) with n >= 1, got "
            f"shape {e.shape}"
        )
    return e.mean(axis=0)


def umbmark_correction(
    cw_errors: np.ndarray, ccw_errors: np.ndarray, *, side: float, track: float
) -> UmbmarkCorrection:
    """Wheel-diameter ratio and effective track from bidirectional square-test end errors.

    Parameters
    ----------
    cw_errors : ndarray, shape (n, 2)
        End position errors of the clockwise runs, true minus odometry, x [m], y [m], in the
        frame of the start pose (start heading along +x).
    ccw_errors : ndarray, shape (m, 2)
        The same for the counter-clockwise runs.
    side : float
        Side L of the square [m].
    track : float
        Nominal track b used by the odometry during the runs [m].

    Returns
    -------
    UmbmarkCorrection

    Raises
    ------
    ScenarioError
        For malformed errors, non-positive sizes, or errors too large for the first-order
        model (a turn shortfall or leg bend beyond 45 deg).

    Examples
    --------
    No systematic error, nothing to correct:

    >>> c = umbmark_correction(np.zeros((5, 2)), np.zeros((5, 2)), side=4.0, track=0.4)
    >>> (c.diameter_ratio, c.track_scale, c.track)
    (1.0, 1.0, 0.4)
    """
    if not (side > 0.0 and track > 0.0):
        raise ScenarioError(f"umbmark: side and track must be > 0, got {side!r}, {track!r}")
    cw = _centre(cw_errors, "cw_errors")
    ccw = _centre(ccw_errors, "ccw_errors")
    alpha_x = float((cw[0] + ccw[0]) / (-4.0 * side))
    beta_x = float((cw[0] - ccw[0]) / (-4.0 * side))
    alpha_y = float((cw[1] - ccw[1]) / (-4.0 * side))
    beta_y = float((cw[1] + ccw[1]) / (-4.0 * side))
    alpha = 0.5 * (alpha_x + alpha_y)
    beta = 0.5 * (beta_x + beta_y)
    if abs(alpha) >= np.pi / 4 or abs(beta) >= np.pi / 4:
        raise ScenarioError(
            f"umbmark: end errors must be small against the side, got alpha {alpha:.3g} rad, "
            f"beta {beta:.3g} rad (beyond 45 deg)"
        )
    # E_d = (R + b/2) / (R - b/2) with R = (L/2) / sin(beta/2), written without R so that
    # beta = 0 (a straight leg, R infinite) gives E_d = 1 exactly
    q = track * np.sin(beta / 2.0) / side
    diameter_ratio = float((1.0 + q) / (1.0 - q))
    track_scale = float((np.pi / 2.0) / (np.pi / 2.0 - alpha))
    return UmbmarkCorrection(
        alpha=alpha,
        beta=beta,
        alpha_x=alpha_x,
        beta_x=beta_x,
        alpha_y=alpha_y,
        beta_y=beta_y,
        diameter_ratio=diameter_ratio,
        track_scale=track_scale,
        track=track_scale * track,
        left_scale=2.0 / (diameter_ratio + 1.0),
        right_scale=2.0 / (1.0 / diameter_ratio + 1.0),
        e_max_syst=float(max(np.hypot(*cw), np.hypot(*ccw))),
    )
