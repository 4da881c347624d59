"""Benchmark: estimator updates per second, EKF and particle filter, for large batches.

:func:`bench_estimators` is wired into ``skidpad bench``. Readings come from the sensor
suite of :mod:`sim.bench_sensors` (mecanum, encoders, pods, IMU, fixes at 30 Hz and 60 ms
late from four landmarks, range sensors) on robots driving arcs; they are made before the
clock starts, so only ``update`` is timed. A tick with fixes costs more than one without
(the EKF folds each fix into its history and replays the later increments), and the
timed window holds both in their natural proportion.
"""

from __future__ import annotations

import time

import numpy as np

from planners.estimators import ESTIMATORS
from planners.kinematics import ChassisGeometry
from planners.se2 import compose, exp
from sim.bench_sensors import _DT, _field, _suite
from sim.sensors import Sensors


def _readings(n: int, ticks: int) -> tuple[dict, list]:
    suite, field = _suite(), _field()
    geometry = ChassisGeometry(kind="mecanum", wheel_radius=0.048, track=0.36, wheelbase=0.30, wheels=4)
    sensors = Sensors(suite, field=field, wheel_count=4, dt=_DT)
    pose0 = np.column_stack([np.full(n, 0.8), np.linspace(0.5, 1.2, n), np.zeros(n)])
    sensors.reset([np.random.default_rng(s) for s in np.random.SeedSequence(0).spawn(n)], pose0)
    twist = np.tile([0.6, 0.1, 0.5], (n, 1))
    wheel_rate = twist @ geometry.inverse_matrix.T
    out = [
        sensors.read(k * _DT, compose(pose0, exp(twist * (k * _DT))), wheel_rate * (k * _DT))
        for k in range(ticks)
    ]
    return {"geometry": geometry, "sensors": suite, "field": field, "dt": _DT}, out


def _time(kind: str, n: int, ticks: int, params: dict) -> dict[str, float]:
    context, readings = _readings(n, 2 * ticks)
    est = ESTIMATORS.get(kind)(source="encoders+imu", **params, **context)
    pose0 = np.column_stack([np.full(n, 0.8), np.linspace(0.5, 1.2, n), np.zeros(n)])
    est.reset(pose0, n, rngs=[np.random.default_rng(s) for s in np.random.SeedSequence(1).spawn(n)])
    spent = 0.0
    for k, r in enumerate(readings):  # the first half warms up
        t0 = time.perf_counter()
        est.update(r.t, r)
        if k >= ticks:
            spent += time.perf_counter() - t0
    per_update = spent / ticks
    return {"update_s": per_update, "robot_updates_per_s": n / per_update}


def bench_estimators(*, quick: bool = False) -> dict:
    """Time ``update`` of ``ekf`` (N = 1000) and ``particle`` (N = 100 x 500 and N = 1000 x 200).

    Parameters
    ----------
    quick : bool — N = 100 for the EKF, N = 20 for the particle filter, fewer ticks

    Returns
    -------
    dict
        ``{"ekf n=<N>": {"update_s": s, "robot_updates_per_s": r}, "particle n=<N> p=<P>": ...}``:
        mean wall time of one batched update [s] and robots updated per second.
    """
    ticks = 20 if quick else 60  # 60 ticks at 200 Hz hold 9 fix ticks (30 Hz)
    runs = (
        [("ekf", 100, {}), ("particle", 20, {"particles": 500})] if quick
        else [("ekf", 1000, {}), ("particle", 100, {"particles": 500}),
              ("particle", 1000, {"particles": 200})]
    )
    out = {}
    for kind, n, params in runs:
        label = f"{kind} n={n}" + (f" p={params['particles']}" if params else "")
        out[label] = _time(kind, n, ticks, params)
    return out


if __name__ == "__main__":  # pragma: no cover
    for key, row in bench_estimators().items():
        print(key, f"{row['update_s'] * 1e3:.2f} ms/update, {row['robot_updates_per_s']:,.0f} robot-updates/s")
