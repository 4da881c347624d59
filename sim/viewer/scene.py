"""What the viewer shows: a scenario, its path and one or more recorded robots (tracks).

A :class:`Track` is one robot's channels (``(T, ...)`` arrays, the names of
:data:`sim.trace.CHANNELS`). Replay tracks are columns of a saved :class:`~sim.trace.Trace`;
live tracks are views into a running simulation's recorder, which fills them tick by tick.
Both are read the same way, so a replayed frame is the live frame at the same tick.
No pygame here: this module is plain numpy and shapely.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import shapely

from planners.plan import Plan
from sim.config_robot import Robot
from sim.scenario import Scenario
from sim.trace import Trace


@dataclass(eq=False)
class Track:
    """One recorded robot.

    Attributes
    ----------
    data : dict of str -> ndarray, shape (T, ...) — channels of one robot
    t : ndarray, shape (T,) — time [s]
    run : int — run index k
    label : str — where it came from (file name, "live")
    status : str — final status once known ("completed", "timeout", ...; "" unknown)
    end : int or None — its last tick once ended (None: still going, or unknown)
    ticks : callable () -> int — how many ticks hold data now (grows in a live run)
    """

    data: dict[str, np.ndarray]
    t: np.ndarray
    run: int
    label: str = ""
    status: str = ""
    end: int | None = None
    ticks: Callable[[], int] = lambda: 0
    _contacts: tuple[int, np.ndarray] = field(default=(0, np.zeros(0, dtype=bool)), repr=False)
    memo: dict = field(default_factory=dict, repr=False)  # drawing caches keyed by what they depend on

    def last(self) -> int:
        """Last tick worth showing: its end tick, or the newest recorded one."""
        n = self.ticks()
        return min(self.end, n - 1) if self.end is not None else n - 1

    def at(self, k: int) -> int:
        """Tick ``k`` clipped to what this track holds (a robot that ended stays put)."""
        return int(min(max(k, 0), max(self.last(), 0)))

    def status_at(self, k: int) -> str:
        """Status shown at tick ``k``: "running" before the end, the final status after."""
        if self.end is not None and k >= self.end:
            return self.status or "ended"
        return "running"

    def worst_tick(self) -> int | None:
        """Tick of the largest |cross-track error| so far (None when there is none)."""
        xt = np.abs(self.data["cross_track"][: self.last() + 1])
        if xt.size == 0 or not np.isfinite(xt).any():
            return None
        return int(np.nanargmax(xt))

    def contacts(self, robot: Robot, scenario: Scenario) -> np.ndarray:
        """Whether the true footprint touches a wall or obstacle, (n,) bool for ticks so far."""
        done, flags = self._contacts
        n = self.last() + 1
        if n > done:
            new = footprint_touches(robot, scenario, self.data["pose"][done:n])
            flags = np.concatenate([flags[:done], new])
            self._contacts = (n, flags)
        return flags[:n]


def tracks_of(trace: Trace, *, label: str = "", statuses: Sequence[str] | None = None) -> list[Track]:
    """Every recorded robot of a saved trace as a track."""
    out = []
    for c, run in enumerate(trace.runs):
        data = {name: arr[:, c] for name, arr in trace.data.items()}
        ticks = trace.ticks
        out.append(Track(
            data=data, t=trace.t, run=int(run), label=label,
            status=statuses[c] if statuses else "", end=trace.end_tick(c),
            ticks=lambda ticks=ticks: ticks,
        ))
    return out


@dataclass(eq=False)
class Scene:
    """A scenario with its path and tracks.

    Attributes
    ----------
    scenario : Scenario
    tracks : list of Track
    dt : float — control period [s]
    path : ndarray, shape (M, 2) — the path to draw [m], field frame
    path_speed : ndarray, shape (M,) — planned speed along it [m/s]
    highlight : int — index of the chosen track
    title : str
    live : object or None — the running simulation driver (see :mod:`sim.viewer.sources`)
    """

    scenario: Scenario
    tracks: list[Track]
    dt: float
    path: np.ndarray
    path_speed: np.ndarray
    highlight: int = 0
    title: str = ""
    live: object | None = None

    @property
    def robot(self) -> Robot:
        return self.scenario.robot

    @property
    def chosen(self) -> Track:
        """The highlighted track."""
        return self.tracks[self.highlight]

    def ticks(self) -> int:
        """Ticks available to show (the longest track)."""
        return max((tr.last() + 1 for tr in self.tracks), default=0)

    def time(self, k: int) -> float:
        """Time of tick ``k`` [s] (exactly k * dt)."""
        return k * self.dt

    def poses(self, channel: str, k: int) -> np.ndarray:
        """Channel ``channel`` of every track at tick ``k`` (each clipped to its end), (R, ...)."""
        return np.stack([tr.data[channel][tr.at(k)] for tr in self.tracks]) if self.tracks else np.zeros((0, 3))


def path_from_plan(plan: Plan) -> tuple[np.ndarray, np.ndarray]:
    """Path points (M, 2) [m] and the planned speed at each (M,) [m/s]."""
    xy = np.column_stack([plan.path_x, plan.path_y])
    speed_t = np.hypot(plan.velocity[:, 0], plan.velocity[:, 1])
    order = np.argsort(plan.s, kind="stable")
    s_sorted = plan.s[order]
    # several ticks share one arc length while dwelling; take the fastest of them
    uniq, first = np.unique(s_sorted, return_index=True)
    fastest = np.maximum.reduceat(speed_t[order], first)
    speed = np.interp(plan.path_s, uniq, fastest) if uniq.size > 1 else np.full(len(xy), fastest[0])
    return xy, speed


def path_from_reference(track: Track, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """Fallback path when no plan is at hand: the recorded reference poses and their speed."""
    ref = track.data["reference"][: track.last() + 1, :2]
    ref = ref[np.isfinite(ref).all(axis=1)]
    if len(ref) < 2:
        return ref.reshape(-1, 2), np.zeros(len(ref))
    step = np.hypot(*np.diff(ref, axis=0).T) / dt
    return ref, np.concatenate([step[:1], step])


# ---------------------------------------------------------------------- robot geometry


def body_to_field(pose: np.ndarray, local: np.ndarray) -> np.ndarray:
    """Body-frame points (P, 2) placed at poses (N, 3) -> field points (N, P, 2)."""
    pose = np.asarray(pose, dtype=np.float64).reshape(-1, 3)
    c = np.cos(pose[:, 2])[:, None]
    s = np.sin(pose[:, 2])[:, None]
    x = pose[:, :1] + c * local[None, :, 0] - s * local[None, :, 1]
    y = pose[:, 1:2] + s * local[None, :, 0] + c * local[None, :, 1]
    return np.stack([x, y], axis=-1)


def outline(robot: Robot) -> np.ndarray:
    """Footprint corners in the body frame, (4, 2) [m], counter-clockwise from rear right."""
    length, width = robot.footprint
    return np.array([[-length, -width], [length, -width], [length, width], [-length, width]]) / 2.0


def wheel_layout(robot: Robot) -> np.ndarray:
    """Wheel centres in the body frame, (W, 2) [m], in the robot's wheel order.

    Mecanum: front-left, front-right, rear-left, rear-right. Skid and differential: left
    wheels front to rear, then right wheels front to rear.
    """
    half_t = robot.track / 2.0
    half_b = robot.wheelbase / 2.0
    if robot.chassis == "mecanum":
        return np.array([[half_b, half_t], [half_b, -half_t], [-half_b, half_t], [-half_b, -half_t]])
    per_side = robot.wheel_count // 2
    xs = np.linspace(half_b, -half_b, per_side) if per_side > 1 else np.zeros(1)
    return np.vstack([np.column_stack([xs, np.full(per_side, half_t)]),
                      np.column_stack([xs, np.full(per_side, -half_t)])])


def wheel_outline(robot: Robot) -> np.ndarray:
    """One wheel's rectangle about its centre, body frame, (4, 2) [m]."""
    r = robot.wheel_radius
    w = min(0.7 * r, 0.25 * robot.track)
    return np.array([[-r, -w / 2], [r, -w / 2], [r, w / 2], [-r, w / 2]])


def drive_force(robot: Robot, current: np.ndarray) -> np.ndarray:
    """Approximate wheel drive force from motor current [A] -> [N] (torque constant x gearing).

    ``F = (tau_stall / I_stall) * I * G * eta / r``: the DC motor's torque is linear in its
    current; the viewer only needs the size of the arrow, not the free-current correction.
    """
    m = robot.motor
    kt = m.stall_torque / m.stall_current
    return kt * np.asarray(current) * robot.gear_ratio * robot.gear_efficiency / robot.wheel_radius


def footprint_touches(robot: Robot, scenario: Scenario, pose: np.ndarray) -> np.ndarray:
    """Whether the footprint at each pose (T, 3) leaves the floor or meets an obstacle, (T,)."""
    pose = np.asarray(pose, dtype=np.float64).reshape(-1, 3)
    ok = np.isfinite(pose).all(axis=1)
    out = np.zeros(len(pose), dtype=bool)
    if not ok.any():
        return out
    corners = body_to_field(pose[ok], outline(robot))
    polys = shapely.polygons(np.concatenate([corners, corners[:, :1]], axis=1))
    fld = scenario.field
    hit = ~shapely.contains(fld.outline, polys)
    for ob in fld.obstacle_shapes:
        hit |= shapely.intersects(ob, polys)
    out[ok] = hit
    return out


def covariance_ellipse(mean: np.ndarray, cov: np.ndarray, *, level: float = 0.95, points: int = 40) -> np.ndarray:
    """Outline of the ``level`` confidence ellipse of a 2-D Gaussian, (points, 2) [m].

    A point ``x`` lies on it when ``(x - mean)^T cov^-1 (x - mean)`` equals the chi-square
    quantile with 2 degrees of freedom, ``-2 ln(1 - level)`` (closed form for 2 dof).
    """
    cov = 0.5 * (np.asarray(cov, dtype=np.float64) + np.asarray(cov, dtype=np.float64).T)
    vals, vecs = np.linalg.eigh(cov)
    vals = np.clip(vals, 0.0, None)
    r = np.sqrt(-2.0 * np.log(1.0 - level))
    a = np.linspace(0.0, 2.0 * np.pi, points, endpoint=False)
    circle = np.column_stack([np.cos(a), np.sin(a)]) * (r * np.sqrt(vals))[None, :]
    return np.asarray(mean, dtype=np.float64)[None, :2] + circle @ vecs.T
