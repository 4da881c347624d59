"""Closed-loop benchmark: a whole run (physics, sensors, estimator, tracker, wheel control)."""

from __future__ import annotations

import time

from sim.runner import Simulation
from sim.scenario import load_scenario, bundled_dir


def bench_loop(*, scenario: str | None = None, n: int = 1000, quick: bool = False) -> dict:
    """Real-time factor of one robot and robot-seconds per second of N robots in one World.

    Default scenario: the bundled figure-eight for mecanum (holonomic tracker, truth estimator).
    """
    path = scenario or str(bundled_dir("scenarios") / "figure-eight-mecanum.toml")
    sc = load_scenario(path)
    Simulation(sc, runs=[0]).run()  # warm the compiled kernels
    start = time.perf_counter()
    one = Simulation(sc, runs=[0])
    res = one.run()[0].scorecard
    wall1 = time.perf_counter() - start
    n = 100 if quick else n
    start = time.perf_counter()
    many = Simulation(sc, runs=range(n), plan=one.plan)
    cards = many.run()
    walln = time.perf_counter() - start
    sim_s = sum(c.scorecard["duration_s"] for c in cards)
    return {
        "loop_scenario": sc.title,
        "loop_sim_seconds_n1": res["duration_s"],
        "loop_realtime_factor_n1": res["duration_s"] / wall1,
        f"loop_robot_s_per_s_n{n}": sim_s / walln,
    }
