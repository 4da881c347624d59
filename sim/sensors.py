"""Sensor models of N robots: encoders, pods, IMU, absolute fixes and range sensors.

:class:`Sensors` reads the World's truth once per control tick and returns
:class:`planners.readings.Readings`. Truth comes as plain arrays: ``pose`` (N, 3) field
frame and ``wheel_angle`` (N, W), each wheel's accumulated rotation [rad] (slip included,
so encoders see wheel spin as on a real robot).

Between ticks the body is taken to move along the constant-twist arc joining the two
poses (``log`` of the relative pose); pods and the gyro measure that arc exactly, before
their own errors. Every random number of robot k comes from ``rngs[k]`` (one key drawn
at reset; each draw a function of that key, the tick and the sensor: :mod:`sim.sensors_noise`),
drawn only on the ticks a sensor samples. Sample schedules are the same for every robot: a sensor with rate f has sample instants ``j / f`` after the start and reports at
the first tick at or after each. Latency rounds to a whole control tick.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from planners.odometry import pod_matrix
from planners.arrays import as_rows
from planners.readings import Readings
from sim.config_sensors import SensorSuite
from sim.field import Field
from sim.sensor_kernels import (
    encoder_kernel, fix_kernel, imu_kernel, landmark_kernel, motion_kernel, pod_kernel, range_kernel,
)
from sim.sensors_noise import SensorDraws, check_generators

_TWO_PI = 2.0 * np.pi


class Sensors:
    """Every sensor of N robots of one scenario.

    Parameters
    ----------
    config : SensorSuite — the scenario's ``[sensors]`` tables
    field : Field — walls, obstacles and landmarks (fixes, range sensors)
    wheel_count : int — drive wheels W of the chassis
    dt : float — control period [s]; :meth:`read` is called once per tick

    Examples
    --------
    >>> from sim.config_sensors import Encoders
    >>> box = Field(name="box", boundary=np.array([[0, 0], [3, 0], [3, 3], [0, 3.0]]))
    >>> s = Sensors(SensorSuite(encoders=Encoders(counts_per_rev=100)), field=box,
    ...             wheel_count=2, dt=0.01)
    >>> s.reset([np.random.default_rng(1)], np.zeros((1, 3)))
    >>> s.read(0.0, np.zeros((1, 3)), np.array([[np.pi, -0.01]])).encoder_counts
    array([[50., -1.]])
    """

    def __init__(self, config: SensorSuite, *, field: Field, wheel_count: int, dt: float) -> None:
        if not dt > 0.0:
            raise ValueError(f"sensors: dt must be > 0, got {dt!r}")
        self.config = config
        self.field = field
        self.wheel_count = int(wheel_count)
        self.dt = float(dt)
        c = config
        # draws per sample of each sensor (normals, uniforms); a noise-free one draws nothing
        self._draws: dict[str, tuple[int, int]] = {}
        if c.encoders is not None and c.encoders.noise > 0.0:
            self._draws["enc"] = (self.wheel_count, 0)
        if c.pods:
            self._draws["pod"] = (
                len(c.pods) * any(p.noise > 0.0 for p in c.pods),
                len(c.pods) * any(p.skip > 0.0 for p in c.pods),
            )
        if c.imu is not None and (c.imu.rate_noise > 0.0 or c.imu.bias_walk > 0.0):
            self._draws["imu"] = (2, 0)
        if c.fixes is not None:
            f = c.fixes
            self._draws["fix"] = (3 * (f.sigma_xy > 0.0 or f.sigma_heading > 0.0), int(f.dropout > 0.0))
        if any(r.sigma > 0.0 for r in c.range):
            self._draws["range"] = (len(c.range), 0)
        if c.encoders is not None:
            self._counts_per_rad = c.encoders.counts_per_rev / _TWO_PI
        if c.pods:
            self._pod_row = np.ascontiguousarray(
                pod_matrix(np.array([p.at for p in c.pods]), np.array([p.direction for p in c.pods]))
            )
            self._pod_cpm = np.array([p.counts_per_rev / (_TWO_PI * p.radius) for p in c.pods])
            self._pod_noise = np.array([p.noise for p in c.pods])
            self._pod_skip = np.array([p.skip for p in c.pods])
            self._pod_quant = np.array([p.quantise for p in c.pods])
        if c.range:
            self.range_mounts = _frozen([[*r.at, r.direction] for r in c.range])
            d = self.range_mounts[:, 2]
            self._range_rays = _frozen(np.column_stack([self.range_mounts, np.cos(d), np.sin(d)]))
            self.range_max = _frozen([r.max_range for r in c.range])
            self._range_sigma = _frozen([r.sigma for r in c.range])
        if c.fixes is not None:
            f = c.fixes
            self.fix_sigma = _frozen([f.sigma_xy, f.sigma_xy, f.sigma_heading])
            self._lag = int(round(f.latency / self.dt))
            # the fix camera for the kernels: range, cos(fov / 2), axis cos and sin (body frame)
            self._camera = (np.inf if f.range is None else f.range,
                            np.cos(min(f.fov, 2.0 * np.pi) / 2.0), np.cos(f.direction), np.sin(f.direction))
        else:
            self._lag = 0
        self.reset([], np.zeros((0, 3)))

    # ------------------------------------------------------------------ state
    def reset(
        self,
        rngs: Sequence[np.random.Generator],
        pose0: np.ndarray,
        *,
        t0: float = 0.0,
        per_robot: Mapping[str, np.ndarray] | None = None,
    ) -> None:
        """Start N robots: one generator each, true start poses (N, 3).

        Parameters
        ----------
        rngs : sequence of numpy.random.Generator, length N — robot k's own stream
        pose0 : ndarray, shape (N, 3) — true start poses, field frame
        t0 : float — time of tick 0 [s]; the first :meth:`read` is at ``t0``
        per_robot : mapping, optional
            Per-robot values replacing the config's: ``"imu.bias"`` (N,) [rad/s],
            ``"imu.scale_error"`` (N,), ``"pods.scale_error"`` (N, P).
        """
        pose0 = np.ascontiguousarray(pose0, dtype=np.float64)
        n = len(rngs)
        if pose0.shape != (n, 3):
            raise ValueError(f"sensors: pose0 must have shape ({n}, 3), got {pose0.shape}")
        c = self.config
        self.n = n
        self.t0 = float(t0)
        self._k = -1
        rngs = check_generators(rngs)
        self._noise = SensorDraws(rngs, self._draws)
        self._prev = pose0.copy()
        self._trig = np.column_stack([np.cos(pose0[:, 2]), np.sin(pose0[:, 2])])
        self._twist = np.zeros((n, 3))
        self._motion = bool(c.pods or c.imu is not None or c.range)
        self._imu_flags: dict[int, tuple[np.ndarray, np.ndarray]] = {}  # by ticks since the last sample
        self._no_draws = np.empty((0, n))
        self._hist = np.repeat(pose0[None], self._lag + 1, axis=0)
        # the readings of a tick without a fix: shared, read-only
        self._no_fix = (_frozen(np.full((n, 3), np.nan)), _frozen(np.full(n, np.nan)),
                        _frozen(np.zeros(n), bool))
        self._no_ranges = _frozen(np.full((n, len(c.range)), np.nan))
        self._range_due: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}
        over = dict(per_robot or {})
        allowed = ("imu.bias", "imu.scale_error", "pods.scale_error")
        for key in over:
            if key not in allowed:
                raise ValueError(f"sensors: per_robot key must be one of {allowed}, got {key!r}")

        def pick(key: str, default: np.ndarray) -> np.ndarray:
            v = np.array(over.get(key, default), dtype=np.float64)
            if v.shape != default.shape:
                raise ValueError(f"sensors: per_robot[{key!r}] must have shape {default.shape}, got {v.shape}")
            return np.ascontiguousarray(v)

        if c.pods:
            self._pod_scale = pick("pods.scale_error", np.tile([p.scale_error for p in c.pods], (n, 1)))
            self._pod_acc = np.zeros((n, len(c.pods)))
        if c.imu is not None:
            # rows: bias [rad/s] (it walks), scale error, turn since the last sample [rad]
            self._imu_state = np.stack([
                pick("imu.bias", np.full(n, c.imu.bias)),
                pick("imu.scale_error", np.full(n, c.imu.scale_error)),
                np.zeros(n),
            ])
            self._imu_last = 0

    # ------------------------------------------------------------------ schedule
    def _take(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        # this sensor's draws for one sample; empty (0, N) when it draws nothing
        if name not in self._draws:
            return self._no_draws, self._no_draws
        return self._noise.take(name, self._k)

    def _due(self, k: int, rate: float | None) -> bool:
        if rate is None or k == 0:
            return True
        # sample instants j / rate; report at the first tick at or after each
        return math.floor(k * self.dt * rate + 1e-9) > math.floor((k - 1) * self.dt * rate + 1e-9)

    # ------------------------------------------------------------------ read
    def read(self, t: float, pose: np.ndarray, wheel_angle: np.ndarray) -> Readings:
        """Readings of tick ``k`` at ``t = t0 + k dt`` (call every tick, from k = 0).

        Parameters
        ----------
        t : float — time [s]
        pose : ndarray, shape (N, 3) — true poses, field frame
        wheel_angle : ndarray, shape (N, W) — accumulated wheel rotation [rad]

        Returns
        -------
        Readings
        """
        k = self._k + 1
        if abs(t - (self.t0 + k * self.dt)) > 1e-6 * self.dt:
            raise ValueError(
                f"sensors: t must be the next control tick {self.t0 + k * self.dt!r}, got {t!r}"
            )
        n, c = self.n, self.config
        if type(pose) is not np.ndarray or pose.shape != (n, 3):
            if np.shape(pose) != (n, 3):
                raise ValueError(f"sensors: pose must have shape ({n}, 3), got {np.shape(pose)}")
        pose = as_rows(pose, (n, 3))
        self._k = k
        if c.fixes is not None:
            self._hist[k % (self._lag + 1)] = pose
        out = Readings(t=float(t))
        if self._motion:  # the tick's arc; prev and its heading's cos/sin move on to pose
            motion_kernel(self._prev, self._trig, pose, self._twist)
        if c.encoders is not None:
            shape = (n, self.wheel_count)
            if type(wheel_angle) is not np.ndarray or wheel_angle.shape != shape:
                if np.shape(wheel_angle) != shape:
                    raise ValueError(
                        f"sensors: wheel_angle must have shape {shape}, got {np.shape(wheel_angle)}"
                    )
            e = c.encoders
            out.encoder_counts = np.empty(shape)
            z, _ = self._take("enc")
            encoder_kernel(as_rows(wheel_angle, shape), self._counts_per_rad, e.noise, e.quantise, z,
                           out.encoder_counts)
        if c.pods:
            out.pod_counts = np.empty((n, len(c.pods)))
            z, u = self._take("pod")
            pod_kernel(self._twist, self._pod_row, self._pod_cpm, self._pod_scale, self._pod_noise,
                        self._pod_skip, self._pod_quant, z, u, self._pod_acc, out.pod_counts)
        if c.imu is not None:
            self._read_imu(k, out)
        if c.fixes is not None:
            self._read_fix(k, out)
        if c.range:
            self._read_range(k, out)
        return out

    def _read_imu(self, k: int, out: Readings) -> None:
        imu = self.config.imu
        due = k > 0 and self._due(k, imu.rate)
        steps = k - self._imu_last if due else 0
        z = self._take("imu")[0] if due else self._no_draws
        out.gyro_rate = np.empty(self.n)
        imu_kernel(self._twist, self._imu_state, z, out.gyro_rate, due, max(steps * self.dt, 1e-300),
                   imu.rate_noise, imu.bias_walk)
        if due:
            self._imu_last = k
        # valid flags and sample interval, the same for every robot: shared read-only arrays
        flags = self._imu_flags.get(steps)
        if flags is None:
            if len(self._imu_flags) > 64:
                self._imu_flags.clear()
            flags = self._imu_flags[steps] = (_frozen(np.full(self.n, due), bool),
                                              _frozen(np.full(self.n, steps * self.dt)))
        out.imu_valid, out.gyro_interval = flags

    def _read_fix(self, k: int, out: Readings) -> None:
        f, n = self.config.fixes, self.n
        kc = k - self._lag
        out.fix_sigma = self.fix_sigma
        if not (kc >= 0 and self.field.landmark_xy.shape[0] and self._due(k, f.rate)):
            out.fix, out.fix_time, out.fix_valid = self._no_fix
            return
        z, u = self._take("fix")
        out.fix = np.empty((n, 3))
        out.fix_time = np.empty(n)
        out.fix_valid = np.empty(n, dtype=np.bool_)
        fix_kernel(self.field.segments, self.field.landmark_xy, self._hist[kc % (self._lag + 1)],
                   *self._camera, f.dropout, self.fix_sigma, z, u, self.t0 + kc * self.dt,
                   out.fix, out.fix_time, out.fix_valid)

    def landmark_visible(self, pose: np.ndarray) -> np.ndarray:
        """Which landmarks the fix camera sees from each pose.

        Parameters
        ----------
        pose : ndarray, shape (N, 3) — field frame

        Returns
        -------
        ndarray of bool, shape (N, L) — within range, inside the field of view and not
        hidden behind a wall or obstacle
        """
        pose = as_rows(pose, (np.shape(pose)[0], 3))
        out = np.empty((pose.shape[0], self.field.landmark_xy.shape[0]), dtype=np.bool_)
        landmark_kernel(self.field.segments, self.field.landmark_xy, pose, *self._camera, out)
        return out

    def _read_range(self, k: int, out: Readings) -> None:
        out.range_mounts = self.range_mounts
        out.range_max = self.range_max
        due = tuple(self._due(k, s.rate) for s in self.config.range)
        pattern = self._range_due.get(due)
        if pattern is None:  # the same for every robot: shared read-only arrays
            pattern = self._range_due[due] = (
                _frozen(due, bool), _frozen(np.broadcast_to(due, (self.n, len(due))), bool)
            )
        out.range_valid = pattern[1]
        if not any(due):
            out.ranges = self._no_ranges
            return
        z, _ = self._take("range")
        out.ranges = np.empty((self.n, len(due)))
        range_kernel(self.field.segments, self._prev, self._trig, self._range_rays, self.range_max,
                     pattern[0], self._range_sigma, z, out.ranges)

    def true_ranges(self, pose: np.ndarray) -> np.ndarray:
        """Noise-free range of every sensor from each pose, shape (N, R) [m] (inf beyond max)."""
        pose = as_rows(pose, (np.shape(pose)[0], 3))
        trig = np.column_stack([np.cos(pose[:, 2]), np.sin(pose[:, 2])])
        r = self.range_mounts.shape[0]
        d = np.empty((pose.shape[0], r))
        range_kernel(self.field.segments, pose, trig, self._range_rays, self.range_max,
                     np.ones(r, dtype=np.bool_), self._range_sigma, self._no_draws, d)
        return d


def _frozen(values, dtype=np.float64) -> np.ndarray:
    # arrays shared by every Readings (static geometry, the readings of a tick without a
    # sample): read-only so no consumer can change them
    a = np.array(values, dtype=dtype)
    a.setflags(write=False)
    return a
