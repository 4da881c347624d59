"""Benchmark: one control tick of every sensor plus odometry, for N = 1 and N = 1000 robots.

:func:`bench_sensors` is wired into ``skidpad bench``. The suite is deliberately full: a
mecanum chassis with noisy encoders, three pods, an IMU, fixes from four landmarks and two
range sensors, every noise term on; odometry from encoders and from pods with IMU heading.
Each figure is the best of several repeats (other work on a shared machine only slows a
run). The physics step of the same N robots (mecanum, 5 sub-steps of 1 ms per 5 ms tick, as
in :mod:`sim.bench_physics`, on one thread like the sensors) is timed in turn with them, so
the cost of sensors and odometry is also given as a fraction of it, which the machine's load
affects far less than either figure.
"""

from __future__ import annotations

import time

import numpy as np

from planners.odometry import Odometry
from planners.se2 import compose, exp
from sim.config_sensors import Encoders, Fixes, Imu, Pod, RangeSensor, SensorSuite
from sim.field import Field, Landmark
from sim.sensors import Sensors
from sim.bench_physics import PhysicsTicks

_TICKS = 128  # ticks timed per repeat (after as many warm-up ticks)
_REPEATS = 5

_DT = 0.005
_W_R, _A = 0.048, 0.33  # mecanum wheel radius, (wheelbase + track) / 2


def _suite() -> SensorSuite:
    pod = dict(radius=0.024, counts_per_rev=2000, noise=0.3, skip=0.001, scale_error=0.002)
    return SensorSuite(
        encoders=Encoders(counts_per_rev=537.6, noise=0.5),
        pods=(
            Pod(at=(0.0, 0.16), **pod),
            Pod(at=(0.0, -0.16), **pod),
            Pod(at=(-0.12, 0.0), direction=np.pi / 2, **pod),
        ),
        imu=Imu(rate_noise=0.003, bias_walk=1e-4, bias=0.005, scale_error=0.001),
        fixes=Fixes(rate=30.0, latency=0.06, dropout=0.1, fov=np.radians(90), range=3.0),
        range=(
            RangeSensor(at=(0.2, 0.0), max_range=2.0, sigma=0.01, rate=50.0),
            RangeSensor(at=(0.0, 0.2), direction=np.pi / 2, max_range=2.0, sigma=0.01, rate=50.0),
        ),
    )


def _field() -> Field:
    return Field(
        name="workshop floor",
        boundary=np.array([[0, 0], [3.6, 0], [3.6, 3.6], [0, 3.6]], dtype=float),
        obstacles=(np.array([[1.5, 1.5], [2.1, 1.5], [2.1, 2.1], [1.5, 2.1]], dtype=float),),
        landmarks=tuple(Landmark(id=i + 1, at=at) for i, at in
                        enumerate([(0.0, 1.8), (3.6, 1.8), (1.8, 0.0), (1.8, 3.6)])),
    )


def _time_ticks(n: int, ticks: int) -> dict[str, float]:
    # one repeat: fresh sensors and odometry, warmed for ``ticks`` ticks, then timed for as many
    suite, field = _suite(), _field()
    h = np.array([[1, -1, -_A], [1, 1, _A], [1, 1, -_A], [1, -1, _A]]) / _W_R
    sensors = Sensors(suite, field=field, wheel_count=4, dt=_DT)
    odo_enc = Odometry(source="encoders", forward=np.linalg.pinv(h), counts_per_rev=537.6)
    odo_pod = Odometry(
        source="pods+imu",
        pod_at=np.array([p.at for p in suite.pods]),
        pod_direction=np.array([p.direction for p in suite.pods]),
        pod_radius=0.024,
        pod_counts_per_rev=2000,
    )
    rngs = [np.random.default_rng(s) for s in np.random.SeedSequence(0).spawn(n)]
    pose0 = np.column_stack([np.full(n, 0.8), np.linspace(0.5, 3.0, n), np.zeros(n)])
    sensors.reset(rngs, pose0)
    odo_enc.reset(pose0)
    odo_pod.reset(pose0)
    twist = np.tile([0.6, 0.1, 0.5], (n, 1))
    # truth is precomputed so only sensors and odometry are timed
    poses = [compose(pose0, exp(twist * (k * _DT))) for k in range(2 * ticks)]
    wheels = [np.outer(np.full(n, k * _DT), h @ twist[0]) if n else np.zeros((0, 4))
              for k in range(2 * ticks)]
    spent = {"sensors_s": 0.0, "odometry_s": 0.0}
    for k in range(2 * ticks):  # the first half warms up (compiles, fills buffers)
        t0 = time.perf_counter()
        r = sensors.read(k * _DT, poses[k], wheels[k])
        t1 = time.perf_counter()
        odo_enc.update(r)
        odo_pod.update(r)
        t2 = time.perf_counter()
        if k >= ticks:
            spent["sensors_s"] += t1 - t0
            spent["odometry_s"] += t2 - t1
    out = {key: v / ticks for key, v in spent.items()}
    out["total_s"] = out["sensors_s"] + out["odometry_s"]
    return out


def bench_sensors(*, sizes: tuple[int, ...] = (1, 1000), ticks: int = _TICKS, quick: bool = False) -> dict:
    """Time one control tick of all sensors plus odometry, and one physics step, per N.

    Parameters
    ----------
    sizes : tuple of int — batch sizes N to time
    ticks : int — ticks timed per repeat (after as many warm-up ticks)
    quick : bool — one repeat instead of five

    Returns
    -------
    dict
        ``{"n=<N>": {"sensors_s": s, "odometry_s": s, "total_s": s, "physics_s": s,
        "total_over_physics": ratio}, ...}``: wall time per tick [s] of ``Sensors.read``, of
        two odometry updates (encoders; pods + IMU), their sum, one ``World.advance`` of the
        same N on one thread, and the sum as a fraction of the physics step (each the best
        repeat).
    """
    repeats = 1 if quick else _REPEATS
    out = {}
    for n in sizes:
        physics = PhysicsTicks("mecanum", n, threads=False)  # one thread, like the sensors
        runs, steps = [], []
        for _ in range(repeats):  # interleaved, so a change of load meets both alike
            runs.append(_time_ticks(n, ticks))
            steps.append(physics.time(ticks))
        row = {key: min(r[key] for r in runs) for key in ("sensors_s", "odometry_s", "total_s")}
        row["physics_s"] = min(steps)
        row["total_over_physics"] = row["total_s"] / row["physics_s"]
        out[f"n={n}"] = row
    return out


if __name__ == "__main__":  # pragma: no cover
    for key, row in bench_sensors().items():
        print(key, ", ".join(f"{k} {v * 1e6:.1f} us" for k, v in row.items()))
