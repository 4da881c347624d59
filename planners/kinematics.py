"""Chassis geometry and wheel kinematics for mecanum, skid-steer and differential chassis.

Wheel order: mecanum front-left, front-right, rear-left, rear-right; skid and differential
the left wheels (front to rear) then the right wheels.

Mecanum (rollers at 45°, Lynch & Park, *Modern Robotics* 2017, §13.2), with
``a = (wheelbase + track) / 2``::

    r [w_fl, w_fr, w_rl, w_rr] = [vx - vy - a w, vx + vy + a w, vx + vy - a w, vx - vy + a w]

Skid and differential: ``r w = v -/+ omega * track / 2`` (left minus, right plus); a skid
chassis has no kinematic lateral velocity.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numba import njit

from planners.arrays import as_batch
from planners.errors import ScenarioError

CHASSIS = ("mecanum", "skid", "differential")


@dataclass(frozen=True, eq=False)
class ChassisGeometry:
    """Wheel layout of a chassis.

    Attributes
    ----------
    kind : str — "mecanum", "skid" or "differential"
    wheel_radius : float — [m]
    track : float — distance between left and right wheel centres [m]
    wheelbase : float — distance between front and rear wheel centres [m] (0 differential)
    wheels : int — W (mecanum 4, skid 4 or 6, differential 2)
    """

    kind: str
    wheel_radius: float
    track: float
    wheelbase: float
    wheels: int

    def __post_init__(self) -> None:
        allowed = {"mecanum": (4,), "skid": (4, 6), "differential": (2,)}
        if self.kind not in allowed:
            raise ScenarioError(f"chassis: kind must be one of {', '.join(CHASSIS)}, got {self.kind!r}")
        if self.wheels not in allowed[self.kind]:
            raise ScenarioError(
                f"chassis: wheels must be {' or '.join(map(str, allowed[self.kind]))} for "
                f"{self.kind}, got {self.wheels}"
            )

    @cached_property
    def wheel_positions(self) -> np.ndarray:
        """Wheel contact points, shape (W, 2) [m], body frame (x forward, y left)."""
        half_t, half_b = self.track / 2.0, self.wheelbase / 2.0
        if self.kind == "mecanum":
            return np.array([[half_b, half_t], [half_b, -half_t], [-half_b, half_t], [-half_b, -half_t]])
        per_side = self.wheels // 2
        xs = np.linspace(half_b, -half_b, per_side) if per_side > 1 else np.zeros(1)
        left = np.column_stack([xs, np.full(per_side, half_t)])
        right = np.column_stack([xs, np.full(per_side, -half_t)])
        return np.vstack([left, right])

    @cached_property
    def side(self) -> np.ndarray:
        """-1 for left wheels, +1 for right wheels, shape (W,)."""
        return np.where(self.wheel_positions[:, 1] > 0.0, -1.0, 1.0)

    @cached_property
    def inverse_matrix(self) -> np.ndarray:
        """Body twist -> wheel speeds, shape (W, 3): ``w = M @ [vx, vy, omega]`` [rad/s]."""
        r = self.wheel_radius
        if self.kind == "mecanum":
            a = (self.wheelbase + self.track) / 2.0
            m = np.array([[1, -1, -a], [1, 1, a], [1, 1, -a], [1, -1, a]], dtype=np.float64)
            return m / r
        half = self.track / 2.0
        m = np.column_stack([np.ones(self.wheels), np.zeros(self.wheels), self.side * half])
        return m / r

    @cached_property
    def forward_matrix(self) -> np.ndarray:
        """Wheel speeds -> body twist, shape (3, W) (least squares; vy = 0 for skid/differential)."""
        return np.linalg.pinv(self.inverse_matrix)

    def inverse(self, twist: np.ndarray) -> np.ndarray:
        """Wheel speeds for body twists.

        Parameters
        ----------
        twist : ndarray, shape (N, 3) — vx [m/s], vy [m/s], omega [rad/s], body frame

        Returns
        -------
        ndarray, shape (N, W) — wheel speeds [rad/s]
        """
        return _rows_times(as_batch(twist, 3), self._inverse_c)

    def forward(self, wheel_speeds: np.ndarray) -> np.ndarray:
        """Body twist from wheel speeds, shape (N, W) -> (N, 3)."""
        return _rows_times(as_batch(wheel_speeds, self.wheels), self._forward_c)

    @cached_property
    def _inverse_c(self) -> np.ndarray:
        return np.ascontiguousarray(self.inverse_matrix)

    @cached_property
    def _forward_c(self) -> np.ndarray:
        return np.ascontiguousarray(self.forward_matrix)

    def expand_duty(self, duty: np.ndarray) -> np.ndarray:
        """Duty per wheel (N, W); skid and differential also accept (N, 2) [left, right]."""
        d = np.atleast_2d(np.asarray(duty, dtype=np.float64))
        if d.shape[1] == self.wheels:
            return d
        if d.shape[1] == 2 and self.kind != "mecanum":
            per_side = self.wheels // 2
            return np.repeat(d, per_side, axis=1)
        raise ScenarioError(
            f"duty must have {self.wheels} values per robot"
            + (" (or 2: left, right)" if self.kind != "mecanum" else "")
            + f", got {d.shape[1]}"
        )


def _rows_times(rows: np.ndarray, matrix: np.ndarray) -> np.ndarray:
    """``rows @ matrix.T`` computed row by row, so a robot's result never depends on the batch
    size (BLAS picks different summation orders for different shapes)."""
    out = np.empty((rows.shape[0], matrix.shape[0]))
    _rows_times_kernel(rows, matrix, out)
    return out


@njit(cache=True)
def _rows_times_kernel(rows, matrix, out):
    for i in range(rows.shape[0]):
        for a in range(matrix.shape[0]):
            acc = 0.0
            for b in range(matrix.shape[1]):
                acc += rows[i, b] * matrix[a, b]
            out[i, a] = acc
