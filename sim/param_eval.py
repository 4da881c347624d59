"""Evaluate scenario variants: one :class:`~sim.runner.Simulation` of N runs per variant.

``skidpad tune`` and ``skidpad envelope`` try many variants of one scenario (a candidate's
gains, a grid point's speed scale and friction). Each variant is a :class:`Job`: the scenario
file, its ``--set`` overrides and the run indices. Every variant runs the same run indices of
the same base seed, so variants are compared on common random numbers (run ``k`` draws the
same mass, sensor noise, ... in every variant). :class:`Evaluator` runs jobs in this process
(``workers=1``) or on a process pool that lives as long as the evaluator.
"""

from __future__ import annotations

import math
import multiprocessing
from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from dataclasses import dataclass

import numpy as np

from planners.errors import SkidpadError
from sim.batch_executors import single_threaded

#: per-run scorecard figures a job returns
FIGURES = ("cross_track_p95_m", "cross_track_rms_m", "cross_track_max_m", "end_position_error_m", "duration_s",
           "collisions")


@dataclass(frozen=True)
class Job:
    """One variant to evaluate (picklable).

    Parameters
    ----------
    index : int — the caller's number for this variant
    path : str — scenario file
    overrides : tuple of str — ``key=value`` overrides (the run's ``--set`` first)
    runs : tuple of int — run indices k
    """

    index: int
    path: str
    overrides: tuple[str, ...]
    runs: tuple[int, ...]


@dataclass
class JobResult:
    """Per-run outcome of a job.

    Attributes
    ----------
    index : int — the job's index
    status : list of str — per run ("completed", "timeout", ..., "failed" when the job raised)
    figures : dict of str -> ndarray, shape (N,) — :data:`FIGURES` per run (nan when failed)
    timeout : float — the runs' timeout [s] (nan when the job raised)
    error : str — the exception of a job that raised, else ""
    """

    index: int
    status: list[str]
    figures: dict[str, np.ndarray]
    timeout: float
    error: str = ""

    @property
    def completed(self) -> np.ndarray:
        """Shape (N,) bool: the run completed."""
        return np.array([s == "completed" for s in self.status], dtype=bool)


def evaluate(job: Job) -> JobResult:
    """Run one job; a job that raises (e.g. a route that cannot be timed) fails all its runs."""
    from sim.runner import Simulation
    from sim.scenario import load_scenario

    try:
        sim = Simulation(load_scenario(job.path, list(job.overrides)), runs=list(job.runs))
        results = sim.run()
    except SkidpadError as exc:
        nan = np.full(len(job.runs), math.nan)
        return JobResult(job.index, ["failed"] * len(job.runs), {f: nan.copy() for f in FIGURES},
                         math.nan, f"{type(exc).__name__}: {exc}")
    cards = [r.scorecard for r in results]
    figures = {f: np.array([float(c[f]) for c in cards]) for f in FIGURES}
    return JobResult(job.index, [c["status"] for c in cards], figures, float(sim.timeout))


class Evaluator:
    """Runs jobs here (``workers=1``) or on ``workers`` processes; use as a context manager.

    Parameters
    ----------
    workers : int — worker processes (1: in this process, no pool)
    on_done : callable, optional — called as ``on_done(result)`` in this process as each job ends
    """

    def __init__(self, workers: int = 1, *, on_done: Callable[[JobResult], None] | None = None) -> None:
        if workers < 1:
            raise SkidpadError(f"--workers must be >= 1, got {workers}")
        self.workers = workers
        self.on_done = on_done
        self._pool: ProcessPoolExecutor | None = None

    def __enter__(self) -> Evaluator:
        if self.workers > 1:
            # as sim.batch_executors: forkserver where available, else spawn
            method = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
            self._pool = ProcessPoolExecutor(
                self.workers, mp_context=multiprocessing.get_context(method), initializer=single_threaded
            )
        return self

    def __exit__(self, *exc) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)  # also on Ctrl-C
            self._pool = None

    def run(self, jobs: Sequence[Job]) -> list[JobResult]:
        """Evaluate ``jobs``; results in the order of ``jobs``."""
        out: dict[int, JobResult] = {}
        if self._pool is None:
            for i, job in enumerate(jobs):
                out[i] = self._done(evaluate(job))
        else:
            pending = {self._pool.submit(evaluate, job): i for i, job in enumerate(jobs)}
            while pending:
                finished, _ = wait(pending, return_when=FIRST_COMPLETED)
                for fut in finished:
                    out[pending.pop(fut)] = self._done(fut.result())
        return [out[i] for i in range(len(jobs))]

    def _done(self, result: JobResult) -> JobResult:
        if self.on_done is not None:
            self.on_done(result)
        return result
