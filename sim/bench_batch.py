"""Batch benchmark: 1000 runs of the workshop loop, chunked in one process, against single runs."""

from __future__ import annotations

import tempfile
import time

from sim.batch import run_batch
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario


def bench_batch(*, runs: int = 1000, chunk: int = 256, singles: int = 5) -> dict:
    """Wall time of ``runs`` runs of scenarios/workshop-loop.toml with the serial chunked executor.

    The sequential estimate times ``singles`` single-robot runs (each a fresh Simulation, as
    ``skidpad run`` would do) and scales them to ``runs``.

    Returns
    -------
    dict with batch_<runs>_wall_s [s], batch_speedup_vs_sequential [-] and
    loop_robot_s_per_s_n<runs> (simulated robot-seconds per wall second)
    """
    path = str(bundled_dir("scenarios") / "workshop-loop.toml")
    sc = load_scenario(path)
    Simulation(sc, runs=[0]).run()  # warm the compiled kernels
    start = time.perf_counter()
    for k in range(singles):
        Simulation(sc, runs=[k]).run()
    sequential = (time.perf_counter() - start) / singles * runs
    with tempfile.TemporaryDirectory() as out:
        start = time.perf_counter()
        outcome = run_batch([path], out=out, runs=runs, chunk=chunk)
        wall = time.perf_counter() - start
    sim_s = sum(r["duration_s"] for r in outcome.rows if isinstance(r["duration_s"], float))
    return {
        f"batch_{runs}_wall_s": wall,
        "batch_speedup_vs_sequential": sequential / wall,
        f"loop_robot_s_per_s_n{runs}": sim_s / wall,
    }
