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

from typing import Any, ClassVar, NamedTuple, Protocol, runtime_checkable

import numpy as np

from planners.arrays import F8, as_rows
from planners.errors import ScenarioError, did_you_mean, format_value
from planners.params import REQUIRED, Param
from planners.plan import Plan
from planners.registry import Registry

#: every chassis skidpad knows
ALL_CHASSIS: tuple[str, ...] = ("mecanum", "skid", "differential")


class BodyCommand(NamedTuple):
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

    A named tuple (immutable, and cheap to make every tick).
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
        shape = (self.n, 3)
        if (
            type(pose) is np.ndarray and type(velocity) is np.ndarray and pose.dtype is F8
            and velocity.dtype is F8 and pose.shape == shape and velocity.shape == shape
            and pose.flags.c_contiguous and velocity.flags.c_contiguous and self.plan is not None
        ):
            return pose, velocity  # the usual case, checked at the cost of a few attributes
        if self.plan is None:
            raise RuntimeError(f"{type(self).__name__}.command: call reset(plan, n) first")
        if np.shape(pose) != shape or np.shape(velocity) != shape:
            raise ValueError(
                f"tracker {self.name}: pose and velocity must have shape ({self.n}, 3), "
                f"got {np.shape(pose)} and {np.shape(velocity)}"
            )
        return as_rows(pose, shape), as_rows(velocity, shape)


def reference(plan: Plan, t: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return the reference state at time ``t``: pose, body velocity, body accel.

    Past the end the final pose is held at rest (as :meth:`Plan.sample`).

    Returns
    -------
    pose, velocity, accel : ndarray, each shape (3,) — read-only views of the plan
    """
    return plan.at(t)


#: the along-track speed gain shared by the path trackers (see :class:`AlongTrack`)
ALONG_TRACK_PARAM = Param(
    "dimensionless", 1.0, "speed added per metre behind the timed plan [1/s]", ge=0.0
)


class AlongTrack:
    """Speed along the path for the path trackers: the plan's speed plus along-track feedback.

    ``|v| = clip(|v_plan(t)| + gain (s_plan(t) - s_robot), 0, top speed)`` in the plan's
    direction of travel: a robot that fell behind the timed plan (slip, saturated wheels,
    corner cutting) catches up, one ahead slows down (never reverses), and one still short of
    the end when the plan stops creeps on to it. ``gain = 0`` is the plan's speed alone. Pure
    pursuit and Stanley steer only; this timed speed is our addition.

    Direction of travel: on a plan whose heading follows the path (``vy = 0`` throughout) it is
    the sign of the plan's ``vx``, held through stops (reversed legs drive backwards). On a
    plan with its own heading schedule (a mecanum plan that strafes) it is always forward: a
    path tracker turns the chassis onto the path tangent and ignores that schedule.

    Parameters
    ----------
    plan : Plan
    gain : float — along-track gain [1/s]
    """

    def __init__(self, plan: Plan, gain: float) -> None:
        self.plan = plan
        self.gain = float(gain)
        vx, vy = plan.velocity[:, 0], plan.velocity[:, 1]
        speed = np.hypot(vx, vy)
        self.top = float(max(np.max(speed, initial=0.0), 1e-9))
        self.strafing = bool(np.max(np.abs(vy), initial=0.0) > 1e-6 * self.top)
        if self.strafing:
            self.direction = np.ones(len(speed))
        else:
            sign = np.where(vx < 0.0, -1.0, 1.0)
            moving = speed > 1e-9
            last = np.maximum.accumulate(np.where(moving, np.arange(len(speed)), -1))
            self.direction = np.where(last >= 0, sign[np.maximum(last, 0)], 1.0)

    def plan_speed(self, t: float) -> float:
        """Return the plan's speed ``hypot(vx, vy)`` at ``t`` [m/s] (zero past the end)."""
        _, vel, _ = reference(self.plan, t)
        return float(np.hypot(vel[0], vel[1]))

    def speed(self, t: float, s_robot: np.ndarray) -> tuple[np.ndarray, float]:
        """Signed speed of each robot (N,) [m/s] and the direction of travel (+1 or -1).

        Parameters
        ----------
        t : float — [s]
        s_robot : ndarray, shape (N,) — the robots' projected arc length [m]
        """
        k = int(self.plan.index(t))
        base = self.plan_speed(t)
        mag = np.clip(base + self.gain * (self.plan.s[k] - s_robot), 0.0, max(self.top, base))
        direction = float(self.direction[k])
        return direction * mag, direction

    def accel(self, t: float) -> float:
        """Body-x acceleration feedforward at ``t``: direction times ``d|v|/dt`` [m/s^2].

        ``d|v|/dt = (vx ax + vy ay) / |v|``; at rest ``direction * ax`` on a plan that follows
        the path tangent (exact for starts and stops), ``|a|`` on one that strafes.
        """
        _, vel, acc = reference(self.plan, t)
        direction = float(self.direction[self.plan.index(t)])
        speed = float(np.hypot(vel[0], vel[1]))
        if speed > 1e-12:
            return direction * float(vel[0] * acc[0] + vel[1] * acc[1]) / speed
        if self.strafing:
            return float(np.hypot(acc[0], acc[1]))
        return float(acc[0])


#: the final-alignment keys shared by the trackers that steer a heading-bound chassis
SETTLE_PARAMS: dict[str, Param] = {
    "settle_radius": Param(
        "length", 0.1, "after the plan ends, within this distance of the end the robot stops "
        "following the path and drives onto the end pose", ge=0.0,
    ),
    "settle_gain": Param(
        "dimensionless", 2.0, "final alignment gain on position along the heading and on heading "
        "[1/s]", gt=0.0,
    ),
}


def settle(command: BodyCommand, t: float, plan: Plan, pose: np.ndarray, *, radius: float, gain: float) -> BodyCommand:
    """Final alignment: past the plan's end, near the end pose, drive onto it.

    A path tracker holds the line but leaves the end pose to chance, and a unicycle law's
    gains vanish when the reference stops. For each robot within ``radius`` of the end
    position once ``t`` is past the plan's duration, turn-drive-turn: farther than
    :data:`SETTLE_DEADBAND` from the end position, turn toward it (or away from it, driving
    backwards, whichever is the smaller turn) and drive on as the heading comes round,
    ``vx = gain e_x cos^2(bearing error)``; within it, turn in place onto the end heading,
    ``omega = gain wrap(h_end - h)`` (turn rates capped at ``gain`` rad/s, no feedforward).
    Common practice for a heading-bound chassis, no source.

    Parameters
    ----------
    command : BodyCommand — the tracker's own command
    t : float — [s]
    plan : Plan
    pose : ndarray, shape (N, 3) — estimated pose [m, m, rad], field frame
    radius : float — [m]; 0 disables the alignment
    gain : float — [1/s]

    Returns
    -------
    BodyCommand — ``command`` with the aligning robots' rows replaced
    """
    if radius <= 0.0 or t < plan.duration:
        return command
    goal = plan.final_pose[0]
    dx, dy = goal[0] - pose[:, 0], goal[1] - pose[:, 1]
    dist = np.hypot(dx, dy)
    near = dist <= radius
    if not near.any():
        return command
    heading = pose[:, 2]
    along = np.cos(heading) * dx + np.sin(heading) * dy
    to_point = _wrap(np.arctan2(dy, dx) - heading)
    # drive backwards when the end position lies behind
    to_point = np.where(np.abs(to_point) > np.pi / 2, _wrap(to_point + np.pi), to_point)
    to_heading = _wrap(goal[2] - heading)
    far = dist > SETTLE_DEADBAND
    turn = np.clip(np.where(far, to_point, to_heading), -1.0, 1.0)
    vx = gain * along * np.where(far, np.cos(to_point) ** 2, 1.0)
    vel = command.velocity.copy()
    acc = command.accel.copy()
    vel[near, 0] = vx[near]
    vel[near, 1] = 0.0
    vel[near, 2] = gain * turn[near]
    acc[near] = 0.0
    return BodyCommand(velocity=vel, accel=acc, duty=command.duty, target=command.target)


#: final alignment drives to the end position until this close, then turns onto its heading [m]
SETTLE_DEADBAND = 0.012


def _wrap(a: np.ndarray) -> np.ndarray:
    return np.arctan2(np.sin(a), np.cos(a))
