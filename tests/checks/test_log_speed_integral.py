"""Wheel angle from a log of wheel speeds (RobotLog.wheel_angle) against scipy's cumulative
trapezoid rule and a closed-form integral."""

from __future__ import annotations

import numpy as np
from scipy.integrate import cumulative_trapezoid

from planners.robot_log import RobotLog


def _log(t, speeds):
    cols = {f"velocity_{w}": v for w, v in zip(("left", "right"), speeds)}
    return RobotLog(source="mem.csv", t=t, wheels=("left", "right"), columns=cols)


def test_matches_scipy_cumulative_trapezoid_on_uneven_time():
    rng = np.random.default_rng(11)
    t = np.cumsum(rng.uniform(0.004, 0.006, 400))
    speeds = [3.0 * np.sin(2.0 * t), 1.0 + 0.5 * t]
    got = _log(t, speeds).wheel_angle()
    # reference: scipy.integrate.cumulative_trapezoid(y, x, initial=0)
    for j, v in enumerate(speeds):
        np.testing.assert_allclose(got[:, j], cumulative_trapezoid(v, t, initial=0.0), rtol=0, atol=1e-12)
    # closed form of the linear speed: phi = t - t0 + 0.25 (t^2 - t0^2) (the rule is exact on a line)
    np.testing.assert_allclose(got[:, 1], (t - t[0]) + 0.25 * (t**2 - t[0] ** 2), atol=1e-12)


def test_empty_cells_are_interpolated_between_their_neighbours():
    t = np.arange(11) * 0.1
    v = 2.0 + t  # linear: interpolating across the gap recovers it exactly
    holed = v.copy()
    holed[[3, 4, 7]] = np.nan
    got = _log(t, [holed, v]).wheel_angle()
    np.testing.assert_allclose(got[:, 0], cumulative_trapezoid(v, t, initial=0.0), atol=1e-12)
