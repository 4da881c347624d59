"""Dead reckoning: pose from drive encoders or pods (tracking wheels), optionally IMU heading.

Each tick's count increments become one body twist ``xi = [dx, dy, dtheta]`` through a
linear map, and the pose moves along the constant-curvature arc of that twist,
``pose <- pose * exp(xi)`` (Lynch & Park, *Modern Robotics*, 2017, §13.4), never the Euler
step ``pose + R(theta) [dx, dy] , theta + dtheta``.

* ``"encoders"``: ``xi = F dphi`` with the chassis forward-kinematics matrix ``F`` (3, W)
  from wheel rotation [rad] to body displacement (the caller passes it, e.g. the chassis
  geometry's matrix; for mecanum ``F`` is the pseudo-inverse of Lynch & Park eq. 13.10).
* ``"pods"``: pod ``i`` at body point ``p_i`` rolling along ``u_i = [cos d_i, sin d_i]``
  measures ``s_i = u_i . (v + omega x p_i) = a_i . xi`` with
  ``a_i = [cos d_i, sin d_i, x_i sin d_i - y_i cos d_i]``; three pods give ``xi = A^-1 s``
  in closed form (:func:`inverse_closed_form`), more pods least squares, two pods need
  ``no_sideslip`` (``dy = 0``) or an IMU.
* ``"+imu"``: heading comes from the integrated gyro; between gyro samples the base source
  (or, for two pods, the last gyro rate) fills in, and the next sample sets it right.
  With pods, the translation is the least-squares solution given that heading increment.

The compiled tick is :func:`planners.odometry_kernels.odometry_kernel`: no trigonometric call
for a turn under ``planners.se2.SERIES_MAX`` per tick, vectorised over the robots.
"""

from __future__ import annotations

import numpy as np

from planners.arrays import F8, as_rows
from planners.errors import ScenarioError, did_you_mean, format_value
from planners.odometry_kernels import OWN_HEADING, POSITIONS, USE_IMU, odometry_kernel
from planners.readings import Readings
from planners.se2 import wrap

SOURCES = ("encoders", "pods", "encoders+imu", "pods+imu")
_BOOL = np.dtype(np.bool_)


def pod_matrix(at: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """Rows ``a_i`` with ``s_i = a_i . xi`` for pods at ``at`` rolling along ``direction``.

    Parameters
    ----------
    at : ndarray, shape (P, 2) — contact points x, y [m], body frame
    direction : ndarray, shape (P,) — rolling directions [rad], body frame

    Returns
    -------
    ndarray, shape (P, 3) — maps a body twist [dx m, dy m, dtheta rad] to pod travel [m]
    """
    at = np.asarray(at, dtype=np.float64).reshape(-1, 2)
    d = np.asarray(direction, dtype=np.float64).reshape(-1)
    c, s = np.cos(d), np.sin(d)
    return np.column_stack([c, s, at[:, 0] * s - at[:, 1] * c])


def inverse_closed_form(a: np.ndarray, *, where: str = "odometry") -> np.ndarray:
    """Inverse of a 2x2 or 3x3 matrix by the adjugate (Cramer's rule), no iteration.

    Parameters
    ----------
    a : ndarray, shape (2, 2) or (3, 3)
    where : str — start of the error message

    Returns
    -------
    ndarray, same shape — ``a^-1``

    Raises
    ------
    ScenarioError
        When ``a`` is singular or nearly so (pods that cannot separate the motion).
    """
    a = np.asarray(a, dtype=np.float64)
    if a.shape == (2, 2):
        det = a[0, 0] * a[1, 1] - a[0, 1] * a[1, 0]
        adj = np.array([[a[1, 1], -a[0, 1]], [-a[1, 0], a[0, 0]]])
    elif a.shape == (3, 3):
        # adj(A)_ij = cofactor C_ji;  det = a_0 . (a_1 x a_2)
        r0, r1, r2 = a
        adj = np.column_stack([np.cross(r1, r2), np.cross(r2, r0), np.cross(r0, r1)])
        det = float(r0 @ np.cross(r1, r2))
    else:
        raise ValueError(f"{where}: matrix must be 2x2 or 3x3, got shape {a.shape}")
    if abs(det) < 1e-9 * max(1.0, float(np.abs(a).max()) ** a.shape[0]):
        raise _singular(where)
    return adj / det


def _singular(where: str) -> ScenarioError:
    return ScenarioError(
        f"{where}: pods must separate forward, sideways and turning motion, got a singular "
        f"layout; move or turn a pod"
    )


def _solve_map(a: np.ndarray, where: str) -> np.ndarray:
    # closed form when square, least squares (pseudo-inverse) when over-determined
    if a.shape[0] == a.shape[1] and a.shape[0] in (2, 3):
        return inverse_closed_form(a, where=where)
    if a.shape[0] < a.shape[1] or np.linalg.matrix_rank(a) < a.shape[1]:
        raise ScenarioError(
            f"{where}: pods must determine the motion, got {a.shape[0]} pods for "
            f"{a.shape[1]} unknowns"
        )
    return np.linalg.pinv(a)


def pod_twist_maps(
    at: np.ndarray, direction: np.ndarray, *, no_sideslip: bool = False, heading_given: bool = False
) -> tuple[np.ndarray, np.ndarray, bool]:
    """Linear maps from pod travel to body twist.

    Parameters
    ----------
    at : ndarray, shape (P, 2) — pod contact points [m], body frame
    direction : ndarray, shape (P,) — rolling directions [rad], body frame
    no_sideslip : bool — assume ``dy = 0`` (skid or differential chassis)
    heading_given : bool — ``dtheta`` comes from elsewhere (an IMU)

    Returns
    -------
    gain : ndarray, shape (3, P)
        ``xi = gain @ s + couple * dtheta`` (rows dx, dy, dtheta; the dtheta row is the
        pods' own estimate, zero when they cannot give one).
    couple : ndarray, shape (3,)
        Effect of a given ``dtheta`` on dx, dy (zero unless ``heading_given``).
    own_heading : bool
        Whether the pods alone determine ``dtheta``.
    """
    a = pod_matrix(at, direction)
    where = "odometry"
    cols = [0, 2] if no_sideslip else [0, 1, 2]
    gain = np.zeros((3, a.shape[0]))
    couple = np.zeros(3)
    enough = a.shape[0] >= len(cols)
    own_heading = enough and np.linalg.matrix_rank(a[:, cols]) == len(cols)
    if own_heading:
        gain[cols] = _solve_map(a[:, cols], where)
    elif enough and not heading_given:
        raise _singular(where)
    elif not heading_given:
        need = "two (with no_sideslip)" if no_sideslip else "three (or two with no_sideslip)"
        raise ScenarioError(
            f"{where}: pods must be at least {need}, or add an IMU (source 'pods+imu'), "
            f"got {a.shape[0]}"
        )
    if heading_given:
        xy = [0] if no_sideslip else [0, 1]
        m = _solve_map(a[:, xy], where)
        gain[xy] = m
        couple[xy] = -m @ a[:, 2]
    return gain, couple, bool(own_heading)


class Odometry:
    """Dead reckoning for N robots from one counting source, optionally with IMU heading.

    Parameters
    ----------
    source : {"encoders", "pods", "encoders+imu", "pods+imu"}
    forward : ndarray, shape (3, W), optional
        Encoders: wheel rotation [rad] -> body displacement [dx m, dy m, dtheta rad]
        (includes wheel radii and track; the chassis geometry's forward matrix).
    counts_per_rev : float, optional
        Encoders: counts per wheel revolution.
    pod_at : ndarray, shape (P, 2), optional
        Pods: contact points [m], body frame.
    pod_direction : ndarray, shape (P,), optional
        Pods: rolling directions [rad], body frame.
    pod_radius, pod_counts_per_rev : float or ndarray, shape (P,), optional
        Pods: wheel radius [m] and counts per revolution.
    no_sideslip : bool
        Pods: assume no sideways motion (skid/differential), so two pods suffice.
    positions : bool
        Keep x, y of :attr:`pose` (default). Without, only the heading is kept (x, y stay at
        the start): for a caller that uses :attr:`increment` alone, and saves the rotation.

    Examples
    --------
    A differential robot (r = 0.05 m, track 0.3 m) turning both wheels one revolution:

    >>> f = 0.05 * np.array([[0.5, 0.5], [0.0, 0.0], [-1 / 0.3, 1 / 0.3]])
    >>> odo = Odometry(source="encoders", forward=f, counts_per_rev=100)
    >>> odo.reset(np.zeros((1, 3)))
    >>> _ = odo.update(Readings(t=0.0, encoder_counts=np.zeros((1, 2))))
    >>> np.round(odo.update(Readings(t=0.1, encoder_counts=np.full((1, 2), 100.0))), 6)
    array([[0.314159, 0.      , 0.      ]])
    """

    def __init__(
        self,
        *,
        source: str,
        forward: np.ndarray | None = None,
        counts_per_rev: float | None = None,
        pod_at: np.ndarray | None = None,
        pod_direction: np.ndarray | None = None,
        pod_radius: float | np.ndarray | None = None,
        pod_counts_per_rev: float | np.ndarray | None = None,
        no_sideslip: bool = False,
        positions: bool = True,
    ) -> None:
        if source not in SOURCES:
            raise ScenarioError(
                f"odometry: source must be one of {', '.join(map(repr, SOURCES))}, "
                f"got {format_value(source)}{did_you_mean(str(source), SOURCES)}"
            )
        self.source = source
        self.use_imu = source.endswith("+imu")
        if source.startswith("encoders"):
            if forward is None or counts_per_rev is None:
                raise ScenarioError(
                    "odometry: forward and counts_per_rev must be given for encoder odometry, got None"
                )
            f = np.asarray(forward, dtype=np.float64)
            if f.ndim != 2 or f.shape[0] != 3:
                raise ScenarioError(f"odometry: forward must have shape (3, W), got {f.shape}")
            gain = f * (2.0 * np.pi / float(counts_per_rev))
            couple = np.zeros(3)
            own = True
        else:
            if pod_at is None or pod_direction is None or pod_radius is None or pod_counts_per_rev is None:
                raise ScenarioError(
                    "odometry: pod_at, pod_direction, pod_radius and pod_counts_per_rev must be "
                    "given for pod odometry, got None"
                )
            at = np.asarray(pod_at, dtype=np.float64).reshape(-1, 2)
            p = at.shape[0]
            per_count = 2.0 * np.pi * np.broadcast_to(np.asarray(pod_radius, float), (p,))
            per_count = per_count / np.broadcast_to(np.asarray(pod_counts_per_rev, float), (p,))
            gain, couple, own = pod_twist_maps(
                at, pod_direction, no_sideslip=no_sideslip, heading_given=self.use_imu
            )
            gain = gain * per_count[None, :]
        # the kernel's gain: counts -> twist, then the twist's change per given dtheta
        self._gain = np.ascontiguousarray(np.column_stack([gain, couple]))
        self._flags = (
            (USE_IMU if self.use_imu else 0) | (OWN_HEADING if own else 0)
            | (POSITIONS if positions else 0)
        )
        self._field = "encoder_counts" if source.startswith("encoders") else "pod_counts"
        self.reset(np.zeros((0, 3)))

    @property
    def increment(self) -> np.ndarray:
        """The last update's move, shape (N, 3): the body-frame pose of the new estimate seen
        from the previous one, dx [m], dy [m], dtheta [rad] (the odometry's own array, zero
        after :meth:`reset` and the first update)."""
        return self._step

    @property
    def pose(self) -> np.ndarray:
        """Current estimate, shape (N, 3): x [m], y [m], heading [rad], field frame (a copy)."""
        return self._pose.copy()

    def reset(self, pose0: np.ndarray) -> None:
        """Start N robots at ``pose0`` (N, 3), headings wrapped to (-pi, pi]; the next
        :meth:`update` latches the counts."""
        pose0 = np.asarray(pose0, dtype=np.float64)
        if pose0.ndim != 2 or pose0.shape[1] != 3:
            raise ValueError(f"odometry: pose0 must have shape (N, 3), got {pose0.shape}")
        n = pose0.shape[0]
        self._pose = np.ascontiguousarray(pose0.copy())
        h = pose0[:, 2]
        self._pose[:, 2] = np.where((h > -np.pi) & (h <= np.pi), h, wrap(h))
        # cos, sin of each heading, turned along with it by the kernel
        self._cs = np.stack([np.cos(self._pose[:, 2]), np.sin(self._pose[:, 2])])
        self._counts_shape = (n, self._gain.shape[1] - 1)
        self._prev: np.ndarray | None = None
        self._t_prev = 0.0
        # integrated gyro heading, turn since the last gyro sample, last gyro rate
        self._imu = np.zeros((3, n))
        self._imu[0] = self._pose[:, 2]
        self._step = np.zeros((n, 3))
        self._zeros = np.zeros(n)  # gyro stand-ins without an IMU (read only by the kernel)
        self._false = np.zeros(n, dtype=np.bool_)

    def update(self, readings: Readings, *, copy: bool = True) -> np.ndarray:
        """Advance by one tick of readings.

        Parameters
        ----------
        readings : Readings
            Of the N robots; the first call after :meth:`reset` only latches the counts.
        copy : bool
            Return a copy (default), or the odometry's own array, valid until the next call
            (for a caller that reads it at once and must not allocate every tick).

        Returns
        -------
        ndarray, shape (N, 3) — pose estimate, field frame
        """
        counts = getattr(readings, self._field)
        shape = self._counts_shape
        if not (
            type(counts) is np.ndarray and counts.dtype is F8 and counts.shape == shape
            and counts.flags.c_contiguous
        ):
            counts = self._counts_from(counts)
        if self._prev is None:
            self._prev = counts.copy()
            self._t_prev = readings.t
            return self._pose.copy() if copy else self._pose
        if self.use_imu:
            gyro, valid, interval = self._gyro_from(readings)
        else:
            gyro = interval = self._zeros
            valid = self._false
        odometry_kernel(
            self._pose, self._cs, counts, self._prev, self._gain, self._flags, gyro, valid,
            interval, self._imu, float(readings.t - self._t_prev), self._step,
        )
        self._t_prev = readings.t
        return self._pose.copy() if copy else self._pose

    def _counts_from(self, counts: np.ndarray | None) -> np.ndarray:
        # the slow path of update: counts that are missing, misshapen or need converting
        if counts is None:
            raise ScenarioError(
                f"odometry: readings.{self._field} must be present for source "
                f"{self.source!r}, got None"
            )
        if np.shape(counts) != self._counts_shape:
            raise ValueError(
                f"odometry: readings.{self._field} must have shape {self._counts_shape}, "
                f"got {np.shape(counts)}"
            )
        return as_rows(counts, self._counts_shape)

    def _gyro_from(self, readings: Readings) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        gyro, valid, interval = readings.gyro_rate, readings.imu_valid, readings.gyro_interval
        if gyro is None or valid is None or interval is None:
            raise ScenarioError(
                f"odometry: readings.gyro_rate must be present for source {self.source!r}, got None"
            )
        n = (self._counts_shape[0],)
        if not (type(valid) is np.ndarray and valid.dtype is _BOOL and valid.flags.c_contiguous):
            valid = np.ascontiguousarray(valid, dtype=np.bool_)
        return as_rows(gyro, n), valid, as_rows(interval, n)
