"""Batch benchmark: 1000 runs of the figure-eight under LQR + EKF, against single runs."""

from __future__ import annotations

import os
import tempfile
import time

from sim.batch import run_batch
from sim.peak_memory import PeakMemory
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario

#: the benchmark's configuration: the bundled mecanum figure-eight, physics at the default
#: sub-step, 200 Hz control, the LQR tracker and the EKF
OVERRIDES = ("tracker.kind=lqr", "estimator.kind=ekf")


def bench_batch(*, runs: int = 1000, chunk: int = 250, singles: int = 5, quick: bool = False, memory_runs: int = 10000) -> dict:
    """Wall time of ``runs`` runs with the process executor on every core.

    The sequential estimate times ``singles`` single-robot runs (each a fresh Simulation, as
    ``skidpad run`` would do) and scales them to ``runs``.

    Then (unless ``quick``) the peak resident memory of a ``memory_runs``-run batch of the same
    configuration, the parent and its workers together (:mod:`sim.peak_memory`).

    Returns
    -------
    dict with batch_<runs>_wall_s [s], batch_speedup_vs_sequential [-],
    batch_robot_s_per_s (simulated robot-seconds per wall second) and
    batch_<memory_runs>_peak_memory_mb [MiB]
    """
    if quick:
        runs, chunk, singles = 100, 50, 2
    path = str(bundled_dir("scenarios") / "figure-eight-mecanum.toml")
    sc = load_scenario(path, list(OVERRIDES))
    Simulation(sc, runs=[0]).run()  # warm the compiled kernels: one robot ...
    warm = Simulation(sc, runs=range(64))  # ... and a block of them (workers forked from
    for _ in range(3):  # this process start with both loaded, as a warm pool would)
        warm.step()
    start = time.perf_counter()
    for k in range(singles):
        Simulation(sc, runs=[k]).run()
    sequential = (time.perf_counter() - start) / singles * runs
    jobs = max(1, os.cpu_count() or 1)
    with tempfile.TemporaryDirectory() as out:
        start = time.perf_counter()
        outcome = run_batch(
            [path], out=out, runs=runs, chunk=min(chunk, -(-runs // jobs)), overrides=OVERRIDES,
            executor="processes" if jobs > 1 else "serial", jobs=jobs,
        )
        wall = time.perf_counter() - start
    sim_s = sum(r["duration_s"] for r in outcome.rows if isinstance(r["duration_s"], float))
    out = {
        f"batch_{runs}_wall_s": wall,
        "batch_speedup_vs_sequential": sequential / wall,
        "batch_robot_s_per_s": sim_s / wall,
        "batch_jobs": jobs,
    }
    if not quick:
        with PeakMemory() as peak, tempfile.TemporaryDirectory() as out_dir:
            run_batch(
                [path], out=out_dir, runs=memory_runs, chunk=256, overrides=OVERRIDES,
                executor="processes" if jobs > 1 else "serial", jobs=jobs,
            )
        out[f"batch_{memory_runs}_peak_memory_mb"] = peak.peak_bytes / 2**20
    return out
