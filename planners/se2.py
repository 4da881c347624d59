"""Poses and twists on SE(2), batched.

A pose is ``[x, y, heading]`` (metres, metres, radians) of a body frame in a parent frame
(REP 103: x forward, y left, heading counter-clockwise). A twist ``[dx, dy, dtheta]`` is a
constant body velocity integrated over one step: :func:`exp` turns it into the exact
constant-curvature arc, :func:`log` is its inverse.

Every public function takes and returns arrays with a leading batch axis: ``(N, 3)`` in,
``(N, 3)`` out, ``(0, 3)`` allowed. The scalar cores (``exp_one``, ``compose_one``) are numba
functions so compiled kernels elsewhere (odometry, physics) use the same equations.

References: Lynch & Park, *Modern Robotics* (2017), §3.3 and §13.4; Sola, Deray, Atchuthan,
*A micro Lie theory for state estimation in robotics* (2018), App. A (the SE(2) group).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

# Below this |dtheta| the Taylor series of A and B (to theta^14 and theta^15) are exact to
# double precision (the next terms are under 1e-19 of the sum at 0.5) and cost no
# trigonometric call; a physics sub-step never turns this far in practice.
SERIES_MAX = 0.5


@njit(cache=True, inline="always")
def wrap_one(angle: float) -> float:
    """Wrap one angle to (-pi, pi] (an angle already there is returned as it is)."""
    if -np.pi < angle <= np.pi:
        return angle
    a = np.fmod(angle + np.pi, 2.0 * np.pi)
    if a <= 0.0:
        a += 2.0 * np.pi
    return a - np.pi


@njit(cache=True, inline="always")
def wrap_once(angle: float) -> float:
    """Wrap an angle in (-3 pi, 3 pi] to (-pi, pi] by at most one turn (a wrapped heading
    plus a wrapped turn lies there). Two selects and no call, so compiled loops over a batch
    vectorise through it."""
    a = angle - 2.0 * np.pi if angle > np.pi else angle
    return a + 2.0 * np.pi if a <= -np.pi else a


# Taylor coefficients (-1)^k / (2k+1)! of sin(t)/t and (-1)^k / (2k+2)! of (1 - cos t)/t^2
_SIN_C = tuple((-1.0) ** k / math.factorial(2 * k + 1) for k in range(8))
_COS_C = tuple((-1.0) ** k / math.factorial(2 * k + 2) for k in range(8))


@njit(cache=True, inline="always")
def arc_series(theta: float) -> tuple[float, float]:
    """``A = sin(t) / t`` and ``B = (1 - cos(t)) / t`` by their Taylor series (``|t| <= SERIES_MAX``).

    Horner form in ``t^2`` with the coefficients as constants: multiplies and adds only (a
    division costs several times a multiply and does not pipeline), and branch-free, so
    compiled loops over a batch vectorise through it.
    """
    c0, c1, c2, c3, c4, c5, c6, c7 = _SIN_C
    d0, d1, d2, d3, d4, d5, d6, d7 = _COS_C
    t2 = theta * theta
    a = c0 + t2 * (c1 + t2 * (c2 + t2 * (c3 + t2 * (c4 + t2 * (c5 + t2 * (c6 + t2 * c7))))))
    b = theta * (d0 + t2 * (d1 + t2 * (d2 + t2 * (d3 + t2 * (d4 + t2 * (d5 + t2 * (d6 + t2 * d7)))))))
    return a, b


@njit(cache=True, inline="always")
def turn_small(c: float, s: float, dtheta: float, a: float, b: float) -> tuple[float, float]:
    """``(c, s)`` turned by ``dtheta`` (``|dtheta| <= SERIES_MAX``), given its
    :func:`arc_series` ``A``, ``B``: the angle sum with ``cos dtheta = 1 - dtheta B``,
    ``sin dtheta = dtheta A``, then one Newton step towards unit length (the length is 1 to
    rounding, so one suffices and rounding never piles up). Branch-free."""
    cd = 1.0 - dtheta * b
    sd = dtheta * a
    c2 = c * cd - s * sd
    s2 = s * cd + c * sd
    k = 1.5 - 0.5 * (c2 * c2 + s2 * s2)
    return k * c2, k * s2


@njit(cache=True, inline="always")
def turn_trig(c: float, s: float, dtheta: float, heading: float) -> tuple[float, float]:
    """cos and sin of ``heading``, given those of ``heading - dtheta`` and the turn ``dtheta``.

    A small turn rotates ``(c, s)`` by :func:`turn_small` (no trigonometric call, no
    division); a turn beyond :data:`SERIES_MAX` takes cos and sin of ``heading`` afresh.
    """
    if abs(dtheta) > SERIES_MAX:
        return np.cos(heading), np.sin(heading)
    a, b = arc_series(dtheta)
    return turn_small(c, s, dtheta, a, b)


@njit(cache=True, inline="always")
def _arc_coefficients(theta: float) -> tuple[float, float]:
    # V(theta) = [[A, -B], [B, A]] with A = sin(t)/t, B = (1 - cos(t))/t  (Sola 2018, eq. 156)
    if abs(theta) <= SERIES_MAX:
        return arc_series(theta)
    # 1 - cos(t) written as 2 sin^2(t/2): no cancellation
    half = np.sin(0.5 * theta)
    return np.sin(theta) / theta, 2.0 * half * half / theta


@njit(cache=True, inline="always")
def exp_one(dx: float, dy: float, dtheta: float) -> tuple[float, float, float]:
    """Exact arc of a constant body twist: the pose reached from the identity."""
    a, b = _arc_coefficients(dtheta)
    return a * dx - b * dy, b * dx + a * dy, wrap_one(dtheta)


@njit(cache=True, inline="always")
def compose_one(
    x: float, y: float, h: float, bx: float, by: float, bh: float
) -> tuple[float, float, float]:
    """Pose ``a * b``: ``b`` expressed in the frame of ``a``, returned in a's parent frame."""
    c = np.cos(h)
    s = np.sin(h)
    return x + c * bx - s * by, y + s * bx + c * by, wrap_one(h + bh)


@njit(cache=True)
def _exp_kernel(twist: np.ndarray, out: np.ndarray) -> None:
    for i in range(twist.shape[0]):
        out[i, 0], out[i, 1], out[i, 2] = exp_one(twist[i, 0], twist[i, 1], twist[i, 2])


@njit(cache=True, inline="always")
def log_one(x: float, y: float, h: float) -> tuple[float, float, float]:
    """The constant twist whose exact arc reaches pose ``(x, y, h)`` from the identity."""
    theta = wrap_one(h)
    a, b = _arc_coefficients(theta)
    # V^-1 = [[A, B], [-B, A]] / (A^2 + B^2)
    inv = 1.0 / (a * a + b * b)
    return (a * x + b * y) * inv, (-b * x + a * y) * inv, theta


@njit(cache=True)
def _log_kernel(pose: np.ndarray, out: np.ndarray) -> None:
    for i in range(pose.shape[0]):
        out[i, 0], out[i, 1], out[i, 2] = log_one(pose[i, 0], pose[i, 1], pose[i, 2])


def _as_batch(name: str, value: np.ndarray) -> np.ndarray:
    arr = np.asarray(value, dtype=np.float64)
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ValueError(f"{name} must have shape (N, 3), got {arr.shape}")
    return arr


def wrap(angle: np.ndarray | float) -> np.ndarray:
    """Wrap angles to (-pi, pi].

    Parameters
    ----------
    angle : array_like, any shape — radians

    Returns
    -------
    ndarray, same shape — radians in (-pi, pi]

    Examples
    --------
    >>> float(wrap(3 * np.pi))
    3.141592653589793
    """
    a = np.asarray(angle, dtype=np.float64)
    w = np.mod(a + np.pi, 2.0 * np.pi)
    w = np.where(w <= 0.0, w + 2.0 * np.pi, w)
    return w - np.pi


def compose(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Compose poses: ``a * b``.

    Parameters
    ----------
    a : ndarray, shape (N, 3) — pose of frame B in frame A's parent
    b : ndarray, shape (N, 3) or (1, 3) — pose of frame C in frame B

    Returns
    -------
    ndarray, shape (N, 3) — pose of frame C in A's parent frame
    """
    a = _as_batch("a", a)
    b = _as_batch("b", b)
    c, s = np.cos(a[:, 2]), np.sin(a[:, 2])
    out = np.empty(np.broadcast_shapes(a.shape, b.shape))
    out[:, 0] = a[:, 0] + c * b[:, 0] - s * b[:, 1]
    out[:, 1] = a[:, 1] + s * b[:, 0] + c * b[:, 1]
    out[:, 2] = wrap(a[:, 2] + b[:, 2])
    return out


def inverse(a: np.ndarray) -> np.ndarray:
    """Inverse pose: ``inverse(a) * a`` is the identity.

    Parameters
    ----------
    a : ndarray, shape (N, 3)

    Returns
    -------
    ndarray, shape (N, 3)
    """
    a = _as_batch("a", a)
    c, s = np.cos(a[:, 2]), np.sin(a[:, 2])
    out = np.empty_like(a)
    # R^T (-t), -theta  (Lynch & Park 2017, eq. 3.64)
    out[:, 0] = -c * a[:, 0] - s * a[:, 1]
    out[:, 1] = s * a[:, 0] - c * a[:, 1]
    out[:, 2] = wrap(-a[:, 2])
    return out


def between(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Relative pose ``inverse(a) * b``: where ``b`` is, seen from ``a``.

    Parameters
    ----------
    a, b : ndarray, shape (N, 3) — poses in the same frame

    Returns
    -------
    ndarray, shape (N, 3) — ``b`` in the frame of ``a``
    """
    return compose(inverse(a), b)


def exp(twist: np.ndarray) -> np.ndarray:
    """Exponential map: the exact arc of a constant body twist.

    Parameters
    ----------
    twist : ndarray, shape (N, 3) — [dx, dy, dtheta], body velocity times step [m, m, rad]

    Returns
    -------
    ndarray, shape (N, 3) — pose reached from the identity

    Examples
    --------
    A quarter circle of radius 1 m:

    >>> np.round(exp(np.array([[np.pi / 2, 0.0, np.pi / 2]])), 12)
    array([[1.        , 1.        , 1.57079633]])
    """
    twist = _as_batch("twist", twist)
    out = np.empty_like(twist)
    _exp_kernel(np.ascontiguousarray(twist), out)
    return out


def log(pose: np.ndarray) -> np.ndarray:
    """Logarithm map: the constant body twist whose arc reaches ``pose``.

    Parameters
    ----------
    pose : ndarray, shape (N, 3)

    Returns
    -------
    ndarray, shape (N, 3) — [dx, dy, dtheta] with dtheta in (-pi, pi]
    """
    pose = _as_batch("pose", pose)
    out = np.empty_like(pose)
    _log_kernel(np.ascontiguousarray(pose), out)
    return out
