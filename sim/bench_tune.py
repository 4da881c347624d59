"""Tune benchmark: 30 candidates x 100 runs of a ~15 s route, on one process and on a pool
(target < 5 min on 2 cores)."""

from __future__ import annotations

import os
import time

from sim.scenario import bundled_dir

#: pure pursuit on the loading-dock S-bend (15.5 s plan), mass and grip varied per run
SCENARIO = "dock-pursuit.toml"


def _wall(path: str, candidates: int, runs: int, workers: int) -> tuple[float, int]:
    from sim.tune import tune

    start = time.perf_counter()
    out = tune(path, ["tracker.lookahead=0.1m..0.6m"], runs=runs, objective="cross_track_p95",
               budget=candidates, workers=workers)
    return time.perf_counter() - start, len(out.candidates)


def bench_tune(*, candidates: int = 30, runs: int = 100, workers: int | None = None, quick: bool = False) -> dict:
    """Wall time of ``skidpad tune`` of ``tracker.lookahead`` on scenarios/dock-pursuit.toml.

    The same search runs on ``workers`` worker processes and, when that is more than one, once
    more in this process (``--workers 1``), so the pool's gain shows as a ratio (less sensitive
    to the machine's load than either time).

    Parameters
    ----------
    candidates : budget (candidates evaluated)
    runs : runs per candidate
    workers : worker processes (default: the machine's cores, at most 2 as in the target)
    quick : 10 candidates x 20 runs

    Returns
    -------
    dict with tune_<K>x<N>_wall_s [s] (on ``workers``), tune_s_per_candidate [s], tune_workers,
    tune_candidates_evaluated, tune_target_5min_met (only meaningful for the full size) and,
    with a pool, tune_<K>x<N>_wall_s_1_worker [s] and tune_pool_speedup (1-worker wall / pool wall)
    """
    if quick:
        candidates, runs = 10, 20
    workers = workers or min(2, os.cpu_count() or 1)
    path = str(bundled_dir("scenarios") / SCENARIO)
    wall, evaluated = _wall(path, candidates, runs, workers)
    out = {
        f"tune_{candidates}x{runs}_wall_s": wall,
        "tune_s_per_candidate": wall / max(1, evaluated),
        "tune_workers": workers,
        "tune_candidates_evaluated": evaluated,
        "tune_target_5min_met": bool(wall < 300.0) if not quick else "n/a (quick)",
    }
    if workers > 1:
        one, _ = _wall(path, candidates, runs, 1)
        out[f"tune_{candidates}x{runs}_wall_s_1_worker"] = one
        out["tune_pool_speedup"] = one / wall
    return out
