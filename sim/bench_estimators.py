"""Benchmark: estimator updates inside real runs, and the particle filter in isolation.

:func:`bench_estimators` is wired into ``skidpad bench``. Three kinds of figure:

* ``ekf figure-eight n=<N>``: the bundled mecanum figure-eight with 10 Hz fixes 100 ms late
  (``sensors.fixes`` added, four landmarks of the practice square) and the EKF on encoders +
  IMU drives the route; the EKF's ``update`` is timed inside the run loop, tick by tick, and
  averaged over the whole run (ticks with a fix, which replay 20 ticks of history, in their
  natural proportion; the physics between two updates leaves the caches cold, as in use).
* ``particle n=<N> p=<P>``: ``update`` alone on readings made before the clock starts
  (:mod:`sim.bench_sensors`' full suite: fixes at 30 Hz, two range sensors at 50 Hz).
* ``particle run n=20 p=500``: wall time of 30 s of ``scenarios/loading-dock-ranging.toml``
  (eight range beams at 25 Hz, particle filter from a uniform start driving the cart) for
  20 runs in one World, a lap made long enough; the target is under a minute on 2 cores.
"""

from __future__ import annotations

import time

import numpy as np

from planners.estimators import ESTIMATORS
from planners.kinematics import ChassisGeometry
from planners.se2 import compose, exp
from sim.bench_sensors import _DT, _field, _suite
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario
from sim.sensors import Sensors

_FIXES = 'sensors.fixes={rate="10 Hz", latency="100 ms", sigma_xy="2 cm", sigma_heading="1 deg"}'
_EKF = 'estimator={kind="ekf", source="encoders+imu"}'
# the loading-dock cart west down the aisle, round the west end and back east along the south lane
_LONG_DOCK = (
    "route.waypoint=[{at=[9.5, 3.0]}, {at=[6.0, 3.0]}, {at=[2.6, 3.0]}, {at=[1.5, 2.3]},"
    " {at=[1.5, 1.3]}, {at=[2.6, 0.6]}, {at=[6.0, 0.6]}, {at=[9.0, 0.6]}]"
)


def _ekf_in_run(n: int) -> dict[str, float]:
    sc = load_scenario(bundled_dir("scenarios") / "figure-eight-mecanum.toml", [_FIXES, _EKF])
    sim = Simulation(sc, runs=range(n))
    update = sim.estimator.update
    spent: list[float] = []

    def timed(t, readings):
        t0 = time.perf_counter()
        out = update(t, readings)
        spent.append(time.perf_counter() - t0)
        return out

    sim.estimator.update = timed
    sim.run()
    s = np.array(spent[20:])  # the first ticks load the compiled code
    return {"update_s": float(s.mean()), "update_median_s": float(np.median(s)), "ticks": int(s.size)}


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


def _particle_updates(n: int, particles: int, ticks: int) -> dict[str, float]:
    context, readings = _readings(n, 2 * ticks)
    est = ESTIMATORS.get("particle")(source="encoders+imu", particles=particles, **context)
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


def _particle_run(n: int, seconds: float) -> dict[str, float]:
    sc = load_scenario(bundled_dir("scenarios") / "loading-dock-ranging.toml", [_LONG_DOCK, 'run.timeout="60 s"'])
    t0 = time.perf_counter()
    sim = Simulation(sc, runs=range(n))
    while sim.t < seconds - 1e-9 and sim.step():
        pass
    return {"wall_s": time.perf_counter() - t0, "simulated_s": sim.t,
            "particles": int(sc.estimator.params["particles"]), "beams": len(sc.sensors.range)}


def bench_estimators(*, quick: bool = False) -> dict:
    """Time the EKF in a figure-eight run, the particle filter's update, and a particle run.

    Parameters
    ----------
    quick : bool — N = 100 EKF robots, N = 20 particle robots, a 5 s particle run

    Returns
    -------
    dict
        ``{"ekf figure-eight n=<N>": {"update_s", "update_median_s", "ticks"},
        "particle n=<N> p=<P>": {"update_s", "robot_updates_per_s"},
        "particle run n=20 p=500": {"wall_s", "simulated_s", ...}}``: mean (and median) wall
        time of one batched update [s], robots updated per second, wall time of the run [s].
    """
    out = {}
    for n in (1, 100) if quick else (1, 1000):
        out[f"ekf figure-eight n={n}"] = _ekf_in_run(n)
    sizes = [(20, 500)] if quick else [(100, 500), (1000, 200)]
    for n, p in sizes:
        out[f"particle n={n} p={p}"] = _particle_updates(n, p, 20 if quick else 60)
    out["particle run n=20 p=500"] = _particle_run(20, 5.0 if quick else 30.0)
    return out


if __name__ == "__main__":  # pragma: no cover
    import os

    print(f"load {os.getloadavg()[0]:.2f}")
    for key, row in bench_estimators().items():
        print(key, {k: (f"{v * 1e3:.3f} ms" if k.startswith("update") else v) for k, v in row.items()})
