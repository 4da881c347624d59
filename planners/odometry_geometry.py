"""The wheel geometry encoder odometry assumes, with per-side radius and track calibration.

A robot's software knows its wheel radii and track only as well as they were measured.
Scaling the left and right radii and the track of the nominal chassis gives the geometry
the odometry actually uses; the UMBmark test (:mod:`planners.odometry_calibration`) says by
how much to rescale them. For a skid or differential chassis with wheel ``i`` on side
``s_i`` (-1 left, +1 right) of radius ``r_i``, the inverse kinematics is
``w_i = (v + s_i omega b / 2) / r_i`` (Lynch & Park, *Modern Robotics*, 2017, §13.3) and
the forward map is its least-squares inverse.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from planners.errors import ScenarioError
from planners.kinematics import ChassisGeometry


def assumed_forward_matrix(
    geometry: ChassisGeometry,
    *,
    radius_scale: Sequence[float] = (1.0, 1.0),
    track_scale: float = 1.0,
) -> np.ndarray:
    """Forward matrix (wheel rotation -> body displacement) of a rescaled chassis.

    Parameters
    ----------
    geometry : ChassisGeometry — the nominal chassis
    radius_scale : sequence of 2 float — assumed radius / nominal, left and right wheels
        (mecanum: fl, rl are left; fr, rr right)
    track_scale : float — assumed track / nominal (skid and differential only)

    Returns
    -------
    ndarray, shape (3, W) — rows dx [m], dy [m], dtheta [rad] per wheel rotation [rad]

    Raises
    ------
    ScenarioError
        For non-positive scales or a track scale on a mecanum chassis.

    Examples
    --------
    >>> g = ChassisGeometry(kind="differential", wheel_radius=0.05, track=0.4, wheelbase=0.0, wheels=2)
    >>> np.round(assumed_forward_matrix(g, radius_scale=(1.0, 1.02)), 6)
    array([[ 0.025 ,  0.0255],
           [ 0.    ,  0.    ],
           [-0.125 ,  0.1275]])
    """
    left, right = (float(v) for v in radius_scale)
    b_scale = float(track_scale)
    if not (left > 0.0 and right > 0.0 and b_scale > 0.0):
        raise ScenarioError(
            f"sensors.encoders: radius_scale and track_scale must be > 0, got "
            f"[{left:g}, {right:g}] and {b_scale:g}"
        )
    if (left, right, b_scale) == (1.0, 1.0, 1.0):
        return geometry.forward_matrix
    is_left = geometry.wheel_positions[:, 1] > 0.0
    radius = geometry.wheel_radius * np.where(is_left, left, right)
    if geometry.kind == "mecanum":
        if b_scale != 1.0:
            raise ScenarioError(
                f"sensors.encoders: track_scale must be 1 for a mecanum chassis, got {b_scale:g}"
            )
        inverse = geometry.inverse_matrix * geometry.wheel_radius / radius[:, None]
    else:
        half = geometry.track * b_scale / 2.0
        inverse = np.column_stack(
            [np.ones(geometry.wheels), np.zeros(geometry.wheels), geometry.side * half]
        ) / radius[:, None]
    return np.linalg.pinv(inverse)


def side_forward_matrix(radius_left: float, radius_right: float, track: float) -> np.ndarray:
    """Forward matrix of a chassis logged per side (one left and one right wheel position).

    ``v = (r_l w_l + r_r w_r) / 2``, ``omega = (r_r w_r - r_l w_l) / b`` (Lynch & Park 2017,
    §13.3).

    Returns
    -------
    ndarray, shape (3, 2)
    """
    return np.array(
        [[radius_left / 2.0, radius_right / 2.0], [0.0, 0.0], [-radius_left / track, radius_right / track]]
    )
