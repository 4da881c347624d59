"""The tracker protocol, its command type, the registry and a small base class.

A tracker follows a :class:`~planners.plan.Plan` for N robots at once. The runner calls
``reset(plan, n)`` once, then ``command(t, pose, velocity)`` every control tick with the
estimated state; the answer is a :class:`BodyCommand`.

Every tracker class declares

* ``PARAMS: dict[str, Param]`` — its ``[tracker]`` keys (defaults live there);
* ``CHASSIS: tuple[str, ...]`` — the chassis it can drive;
* optionally ``EXAMPLE_PARAMS: dict`` — values for keys without a default, used by the
  conformance checker (:mod:`planners.trackers.checker`);

and is built as ``Cls(chassis=<"mecanum" | "skid" | "differential">, **params_in_SI)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar, Protocol, runtime_checkable

import numpy as np

from planners.errors import ScenarioError, did_you_mean, format_value
from planners.params import REQUIRED, Param
from planners.plan import Plan
from planners.registry import Registry

#: every chassis skidpad knows
ALL_CHASSIS: tuple[str, ...] = ("mecanum", "skid", "differential")


@dataclass(frozen=True, eq=False)
class BodyCommand:
    """What a tracker asks of the chassis for one tick.

    Attributes
    ----------
    velocity : ndarray, shape (N, 3) — vx [m/s], vy [m/s], omega [rad/s], body frame
    accel : ndarray, shape (N, 3) — feedforward ax [m/s^2], ay [m/s^2], alpha [rad/s^2],
        body frame (time derivative of the body velocity components)
    duty : ndarray, shape (N, W), optional — open-loop duty per wheel in [-1, 1]; when set
        the runner bypasses the wheel control and ``velocity``/``accel`` are zero
    target : ndarray, shape (N, 2), optional — the point the tracker steers to (lookahead
        point, nearest path point or reference position), field frame [m], for the viewer
    """

    velocity: np.ndarray
    accel: np.ndarray
    duty: np.ndarray | None = None
    target: np.ndarray | None = None


@runtime_checkable
class Tracker(Protocol):
    """A batched path tracker."""

    name: ClassVar[str]
    PARAMS: ClassVar[dict[str, Param]]
    CHASSIS: ClassVar[tuple[str, ...]]

    def reset(self, plan: Plan, n: int) -> None:
        """Start following ``plan`` with ``n`` robots; clears all memory."""
        ...

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """One control tick.

        Parameters
        ----------
        t : float — time since the plan started [s] (``k * dt``)
        pose : ndarray, shape (N, 3) — estimated x [m], y [m], heading [rad], field frame
        velocity : ndarray, shape (N, 3) — estimated vx, vy [m/s], omega [rad/s], body frame

        Returns
        -------
        BodyCommand
        """
        ...


TRACKERS: Registry[Tracker] = Registry("tracker", "skidpad.trackers")


def resolve_params(where: str, declared: dict[str, Param], given: dict[str, Any]) -> dict[str, Any]:
    """Check keyword parameters (SI values) against declarations and fill in defaults.

    Parameters
    ----------
    where : str — start of error messages, e.g. ``"tracker"`` or ``"control"``
    declared : dict of str -> Param
    given : dict of str -> object — SI values (already converted from units)

    Returns
    -------
    dict — every declared key, given value or default

    Raises
    ------
    ScenarioError
        For an unknown key (with a "did you mean"), a missing required key, a number out of
        its bounds or a string not among the choices.
    """
    for key in given:
        if key not in declared:
            raise ScenarioError(
                f"{where}: {key} must be one of {', '.join(sorted(declared)) or 'no keys'}, "
                f"got an unknown key{_suggest(key, declared)}"
            )
    out: dict[str, Any] = {}
    for key, param in declared.items():
        value = given.get(key, param.default)
        if value is REQUIRED:
            raise ScenarioError(f"{where}: {key} must be given ({param.doc}), got nothing")
        if value is not None and param.dimension == "choice":
            if value not in (param.choices or ()):
                raise ScenarioError(
                    f"{where}: {key} must be {param.allowed()}, got {format_value(value)}"
                    f"{did_you_mean(str(value), param.choices or ())}"
                )
        elif value is not None and param.dimension not in ("tables", "text", "bool", "choice"):
            arr = np.asarray(value, dtype=np.float64)
            bad = (
                (param.gt is not None and np.any(arr <= param.gt))
                or (param.ge is not None and np.any(arr < param.ge))
                or (param.lt is not None and np.any(arr >= param.lt))
                or (param.le is not None and np.any(arr > param.le))
                or not np.all(np.isfinite(arr))
            )
            if bad:
                raise ScenarioError(
                    f"{where}: {key} must be {param.allowed() or 'finite'}, "
                    f"got {format_value(value)}"
                )
        out[key] = value
    return out


def _suggest(word: str, choices: Any) -> str:
    """``did_you_mean``, trying a case-insensitive match first (``kp`` -> ``kP``)."""
    by_lower = {c.lower(): c for c in choices}
    if word.lower() in by_lower:
        return f"; did you mean {by_lower[word.lower()]}?"
    return did_you_mean(word, choices)


class TrackerBase:
    """Shared construction for the built-in trackers: chassis and parameter checks.

    Subclasses set ``PARAMS`` and ``CHASSIS`` and implement ``reset`` and ``command``. The
    resolved parameters are in ``self.params``.
    """

    name: ClassVar[str] = "?"
    PARAMS: ClassVar[dict[str, Param]] = {}
    CHASSIS: ClassVar[tuple[str, ...]] = ALL_CHASSIS
    EXAMPLE_PARAMS: ClassVar[dict[str, Any]] = {}

    def __init__(self, *, chassis: str, **params: Any) -> None:
        if chassis not in self.CHASSIS:
            raise ScenarioError(
                f"tracker: kind {self.name!r} must drive one of "
                f"{', '.join(self.CHASSIS)}, got chassis {chassis!r}"
                f"{did_you_mean(chassis, ALL_CHASSIS)}"
            )
        self.chassis = chassis
        self.params = resolve_params("tracker", self.PARAMS, params)
        self.plan: Plan | None = None
        self.n = 0

    def _check_batch(self, pose: np.ndarray, velocity: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        pose = np.ascontiguousarray(pose, dtype=np.float64)
        velocity = np.ascontiguousarray(velocity, dtype=np.float64)
        if self.plan is None:
            raise RuntimeError(f"{type(self).__name__}.command: call reset(plan, n) first")
        if pose.shape != (self.n, 3) or velocity.shape != (self.n, 3):
            raise ValueError(
                f"tracker {self.name}: pose and velocity must have shape ({self.n}, 3), "
                f"got {pose.shape} and {velocity.shape}"
            )
        return pose, velocity


def reference(plan: Plan, t: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Reference state at time ``t`` for every robot: pose, body velocity, body accel.

    Past the end the final pose is held at rest (as :meth:`Plan.sample`).

    Returns
    -------
    pose, velocity, accel : ndarray, each shape (3,)
    """
    pose, vel, acc = plan.sample(np.array([float(t)]))
    return pose[0], vel[0], acc[0]


def travel_speed(velocity: np.ndarray) -> float:
    """Signed speed along the path of a reference body velocity (negative when reversing).

    Parameters
    ----------
    velocity : ndarray, shape (3,) — plan body velocity [vx, vy, omega]

    Returns
    -------
    float — ``hypot(vx, vy)`` with the sign of ``vx`` [m/s]
    """
    speed = float(np.hypot(velocity[0], velocity[1]))
    return -speed if velocity[0] < 0.0 else speed


def travel_accel(velocity: np.ndarray, accel: np.ndarray) -> float:
    """Rate of change of :func:`travel_speed` from a reference body velocity and accel.

    ``d|v|/dt = (vx ax + vy ay) / |v|`` (with the sign of the travel speed); ``ax`` at rest.

    Parameters
    ----------
    velocity, accel : ndarray, shape (3,) — plan body velocity and body accel

    Returns
    -------
    float — [m/s^2]
    """
    speed = float(np.hypot(velocity[0], velocity[1]))
    if speed < 1e-12:
        return float(accel[0])
    rate = float(velocity[0] * accel[0] + velocity[1] * accel[1]) / speed
    return -rate if velocity[0] < 0.0 else rate
