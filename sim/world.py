"""World: the ground truth of N simulated robots, advanced by ``advance(duty, dt)``."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping

import numpy as np

from planners.arrays import F8
from planners.errors import ScenarioError
from planners.kinematics import ChassisGeometry
from sim.config_robot import Robot
from sim.field import Field
from sim.motors import motor_constants
from sim.substep import CONTACTS, DIVERGED
from sim.thread_choice import ThreadChoice
from sim.physics import BLOCK, COLUMNS, G0, MAX_WHEELS, ROBOT_ROWS, WHEEL_ROWS, step_kernel, step_kernel_parallel
from sim.contact import DAMPING_RATIO, STIFFNESS


def _replace(robot: Robot, key: str, value: float) -> Robot:
    head, _, rest = key.partition(".")
    if rest:
        return dataclasses.replace(robot, **{head: dataclasses.replace(getattr(robot, head), **{rest: value})})
    return dataclasses.replace(robot, **{head: value})


def robot_row(robot: Robot) -> np.ndarray:
    """The parameter row (see :data:`sim.physics.COLUMNS`) of one robot."""
    m = robot.motor
    nominal = m.nominal_voltage or robot.battery.voltage
    k = motor_constants(m, nominal)
    tr = robot.traction
    values = {
        "mass": robot.mass,
        "inertia": robot.yaw_inertia,
        "mu": tr.mu,
        "slip_speed": tr.slip_speed,
        "wheel_radius": robot.wheel_radius,
        "gear_ratio": robot.gear_ratio,
        "gear_efficiency": robot.gear_efficiency,
        "kt": k.kt,
        "ke": k.ke,
        "R": k.R,
        "tau_f": k.tau_f,
        "current_limit": m.current_limit if m.current_limit is not None else 1e9,
        "battery_voltage": robot.battery.voltage,
        "battery_resistance": robot.battery.resistance,
        "wheel_inertia": robot.wheel_inertia + m.rotor_inertia * robot.gear_ratio**2,
        "rolling_resistance": tr.rolling_resistance,
        "roller_friction": tr.roller_friction,
        "coast": 1.0 if robot.idle == "coast" else 0.0,
        "model": 0.0 if tr.model == "coulomb" else 1.0,
        "mf_b": tr.b,
        "mf_c": tr.c,
        "mf_e": tr.e,
        "half_length": robot.footprint[0] / 2.0,
        "half_width": robot.footprint[1] / 2.0,
        "load_transfer": 1.0 if tr.load_transfer else 0.0,
        "cg_height": tr.cg_height,
    }
    return np.array([values[c] for c in COLUMNS])


def static_loads(robot: Robot, geom: ChassisGeometry) -> np.ndarray:
    """Normal load of each wheel at rest [N], shape (W,).

    Linear distribution over the wheel positions that balances the weight and its moments
    about the centre of gravity ``cg``; a differential chassis's casters are taken to carry
    no load (common practice for a light caster, no source).
    """
    xy = geom.wheel_positions
    w = len(xy)
    weight = robot.mass * G0
    cx, cy = robot.cg
    sx = float(np.sum(xy[:, 0] ** 2))
    sy = float(np.sum(xy[:, 1] ** 2))
    load = np.full(w, weight / w)
    if sx > 0:
        load += weight * cx * xy[:, 0] / sx
    if sy > 0:
        load += weight * cy * xy[:, 1] / sy
    return np.clip(load, 0.0, None)


def grip_directions(geom: ChassisGeometry) -> np.ndarray:
    """Per wheel: grip direction (unit, body frame) and rim-speed factor, shape (W, 3)."""
    if geom.kind == "mecanum":
        # the vy coefficient of each row of the inverse kinematics: -1, +1, +1, -1
        s = np.sign(geom.inverse_matrix[:, 1])
        return np.column_stack([np.full(4, 1 / math.sqrt(2)), s / math.sqrt(2), np.full(4, 1 / math.sqrt(2))])
    return np.tile([1.0, 0.0, 1.0], (geom.wheels, 1))


def _oriented_segments(field: Field | None) -> np.ndarray:
    """Wall segments (S, 5): x0, y0, x1, y1, and 1 where the floor lies left of the segment."""
    if field is None:
        return np.zeros((0, 5))
    segs = []
    for ring, is_boundary in [(field.boundary, True)] + [(o, False) for o in field.obstacles]:
        r = np.asarray(ring, dtype=np.float64)
        area = 0.5 * np.sum(r[:, 0] * np.roll(r[:, 1], -1) - np.roll(r[:, 0], -1) * r[:, 1])
        ccw = area > 0
        # CCW boundary: the floor lies left of each edge; CCW obstacle: right of each edge
        free_left = np.full((len(r), 1), 1.0 if ccw == is_boundary else 0.0)
        segs.append(np.hstack([r, np.roll(r, -1, axis=0), free_left]))
    return np.ascontiguousarray(np.vstack(segs))


def _packed_patches(field: Field | None) -> np.ndarray:
    """Friction patches (P, 6 + 2 V): vertex count, friction scale, bounding box, vertices."""
    patches = field.patches if field is not None else ()
    vmax = max([len(p.polygon) for p in patches], default=0)
    out = np.zeros((len(patches), 6 + 2 * vmax))
    for q, p in enumerate(patches):
        poly = np.asarray(p.polygon, dtype=np.float64)
        out[q, 0] = len(poly)
        out[q, 1] = p.friction_scale
        out[q, 2:4] = poly.min(axis=0)
        out[q, 4:6] = poly.max(axis=0)
        out[q, 6 : 6 + 2 * len(poly)] = poly.ravel()
    return out


class World:
    """Truth state of N robots of one design (parameters may differ per robot).

    Parameters
    ----------
    robot : Robot — the nominal robot
    n : int — number of robots N
    field : Field, optional — walls for contact and floor friction; None = open floor
    params : mapping of str -> ndarray (N,), optional — per-robot values of dotted robot keys
        ("mass", "traction.mu", "motor.stall_torque", ...) overriding the nominal robot
    substep : float — physics sub-step [s]; :meth:`check_substep` may lower it
    pose0 : ndarray (N, 3), optional — start poses (default all at the origin)
    threads : bool — allow numba's threads for a large batch when the clock says they pay
        (default); False keeps the physics on the calling thread

    Attributes
    ----------
    pose : (N, 3) field frame; velocity : (N, 3) body frame [vx, vy, omega];
    wheel_speed, wheel_angle : (N, W) [rad/s], [rad]; motor_current : (N, W) [A];
    wheel_load : (N, W) normal load [N]; battery_voltage : (N,) [V]; slip : (N, W) slip
    speed [m/s]; wheel_force : (N, W, 2) floor force on each wheel, body frame [N];
    contact_count : (N,) contacts; in_contact : (N,) bool; peak_penetration : (N,) [m];
    slip_energy : (N,) [J]; diverged : (N,) bool; t : float [s]

    The arrays are views of three state blocks (:mod:`sim.physics` gives the layout) that the
    compiled kernel updates in place: read them, copy what must be kept.
    """

    #: batches at least this large may spread the physics over numba's threads, when the
    #: clock says it pays (sim.thread_choice; below two blocks it never does)
    PARALLEL_MIN = BLOCK + 1

    def __init__(
        self,
        robot: Robot,
        n: int,
        *,
        field: Field | None = None,
        params: Mapping[str, np.ndarray] | None = None,
        substep: float = 0.001,
        pose0: np.ndarray | None = None,
        threads: bool = True,
    ) -> None:
        self.robot = robot
        self.n = n = int(n)
        self.geom = ChassisGeometry(
            kind=robot.chassis, wheel_radius=robot.wheel_radius, track=robot.track,
            wheelbase=robot.wheelbase, wheels=robot.wheel_count,
        )
        w = self.geom.wheels
        if w > MAX_WHEELS:
            raise ScenarioError(f"world: at most {MAX_WHEELS} wheels are simulated, got {w}")
        params = dict(params or {})
        for key, arr in params.items():
            if np.shape(arr) != (n,):
                raise ScenarioError(f"world: params[{key!r}] must have shape ({n},), got {np.shape(arr)}")
        rows = []
        for i in range(n):
            r = robot
            for key, arr in params.items():
                r = _replace(r, key, float(arr[i]))
            rows.append(np.concatenate([robot_row(r), static_loads(r, self.geom)]))
        #: per-robot parameters, one row per quantity (sim.physics.COLUMNS, then wheel loads)
        self.params = np.ascontiguousarray(np.array(rows).reshape(n, len(COLUMNS) + w).T)
        self.layout = np.ascontiguousarray(np.hstack([self.geom.wheel_positions, grip_directions(self.geom)]))
        self.segs = _oriented_segments(field)
        self.patches = _packed_patches(field)
        self.floor_scale = float(field.friction_scale) if field is not None else 1.0
        self.substep, note = self.check_substep(robot, substep)
        self.notes = [note] if note else []
        self._body = np.zeros((2, n, 3))
        if pose0 is not None:
            self._body[0] = np.asarray(pose0, dtype=np.float64).reshape(n, 3)
        self._wheel = np.zeros((len(WHEEL_ROWS), n, w))
        self._robot = np.zeros((len(ROBOT_ROWS), n))
        self._robot[0] = self.params[COLUMNS.index("battery_voltage")]
        # no heading seen yet: the first step computes its cosine and sine
        self._robot[ROBOT_ROWS.index("heading_seen")] = np.nan
        self._wheel[WHEEL_ROWS.index("load")] = self.params[len(COLUMNS):].T
        self._threads = ThreadChoice() if threads and n >= self.PARALLEL_MIN else None
        # (N, W), or (N, 2) [left, right] for skid and differential
        self._duty_shapes = {(n, w)} | ({(n, 2)} if self.geom.kind != "mecanum" else set())
        self.pose, self.velocity = self._body
        (
            self.wheel_speed, self.wheel_angle, self.motor_current, self.slip, _, _, self.wheel_load
        ) = self._wheel
        self.battery_voltage = self._robot[0]
        self._ticks = 0
        self._dt = None
        self._steps = 1
        self.t = 0.0

    @staticmethod
    def check_substep(robot: Robot, substep: float) -> tuple[float, str | None]:
        """The sub-step to use and a message when it had to be lowered.

        The wheel spin is implicit, so what bounds the step is the body against the slip
        stiffness (``h < 2 m vs / (mu m g)``, explicit Euler on ``m dv/dt = -k v`` with
        ``k = mu m g / vs``) and the contact springs (``h < 2 / omega_c``); a margin of 4 is
        kept on both (common practice, no source).
        """
        tr = robot.traction
        k_slip = tr.mu * robot.mass * G0 / tr.slip_speed
        h_slip = 2.0 * robot.mass / k_slip
        omega_c = math.sqrt(STIFFNESS / robot.mass) * (1 + DAMPING_RATIO)
        h_contact = 2.0 / omega_c
        h_max = min(h_slip, h_contact) / 4.0
        if substep <= h_max:
            return substep, None
        return h_max, (
            f"physics sub-step lowered from {substep * 1e3:g} ms to {h_max * 1e3:.3g} ms for this "
            f"robot (slip stiffness or contact)"
        )

    def _row(self, name: str) -> np.ndarray:
        return self._robot[ROBOT_ROWS.index(name)]

    def status_rows(self) -> np.ndarray:
        """Live view (2, N) of the contact counts (as floats) and the diverged flags (non-zero
        once diverged), for per-tick checks without copies; do not write to it."""
        return self._robot[CONTACTS : DIVERGED + 1]  # adjacent rows of sim.substep.ROBOT_ROWS

    @property
    def body(self) -> np.ndarray:
        """Live view (2, N, 3) of the pose (field frame) and body velocity; do not write to it."""
        return self._body

    @property
    def wheel_force(self) -> np.ndarray:
        """Floor force on each wheel, body frame [N], shape (N, W, 2) (a copy)."""
        return np.stack([self._wheel[WHEEL_ROWS.index("force_x")], self._wheel[WHEEL_ROWS.index("force_y")]], axis=-1)

    @property
    def contact_count(self) -> np.ndarray:
        """Contacts with walls or obstacles so far, shape (N,) (a contact ends once the robot
        has been clear for :data:`sim.substep.CONTACT_CLEAR` seconds)."""
        return self._row("contacts").astype(np.int64)

    @property
    def diverged(self) -> np.ndarray:
        """Robots whose state became non-finite (frozen since), shape (N,)."""
        return self._row("diverged") != 0.0

    @property
    def in_contact(self) -> np.ndarray:
        """In a contact now (touching, or clear for less than CONTACT_CLEAR), shape (N,)."""
        return self._row("in_contact") > 0.0

    @property
    def peak_penetration(self) -> np.ndarray:
        """Deepest contact penetration so far [m], shape (N,)."""
        return self._row("peak_penetration").copy()

    @property
    def slip_energy(self) -> np.ndarray:
        """Energy dissipated by wheel slip so far [J], shape (N,)."""
        return self._row("slip_energy").copy()

    def advance(self, duty: np.ndarray, dt: float) -> None:
        """Apply ``duty`` (N, W) in [-1, 1] (skid/differential also (N, 2)) for ``dt`` seconds.

        Duty beyond [-1, 1] is clipped.
        """
        d = duty
        if type(d) is not np.ndarray or d.dtype is not F8 or not d.flags.c_contiguous:
            d = np.ascontiguousarray(np.atleast_2d(np.asarray(duty, dtype=np.float64)))
        if d.shape not in self._duty_shapes:
            self.geom.expand_duty(d)  # raises the one-line error for a wrong wheel count
            raise ValueError(f"duty must have shape ({self.n}, {self.geom.wheels}), got {d.shape}")
        if dt != self._dt:
            self._dt = dt
            self._steps = max(1, int(math.ceil(dt / self.substep - 1e-9)))
        steps = self._steps
        kernel = step_kernel_parallel if self._threads is not None and self._threads.threaded() else step_kernel
        kernel(
            self._body, self._wheel, self._robot, d, self.params, self.layout, self.segs,
            self.patches, self.floor_scale, dt / steps, steps,
        )
        self._ticks += 1
        self.t = self._ticks * dt
