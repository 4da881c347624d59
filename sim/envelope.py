"""Speed envelope: completion and end error over a grid of two scenario keys.

The default grid is route speed scale (``route.speed_scale``, the route time-scaled: speeds x c,
accelerations x c^2) against floor friction (``robot.traction.mu``, the robot's wheel-floor
friction coefficient; a field's ``friction_scale`` and patches still multiply it). Any two
numeric keys may replace them. Each grid point is one :class:`~sim.runner.Simulation` of runs
``0..N-1`` of the scenario's seed, the same runs at every point (common random numbers).

A grid point is *within the envelope* when at least ``min_completion`` (95 %) of its runs
complete and the 95th percentile over all N runs of ``end_position_error_m`` is at most
``tolerance`` (a run that diverged, or a point whose route cannot be timed, counts as an
infinite error). For each y value the envelope reports the largest x within it.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from planners.errors import SkidpadError
from sim.param_eval import Evaluator, Job, JobResult
from sim.param_space import Axis, override, parse_axis
from sim.scenario import load_scenario
from sim.units import to_si

SPEED_KEY = "route.speed_scale"
MU_KEY = "robot.traction.mu"


def parse_steps(text: str, *, where: str) -> tuple[int, int]:
    """``"5x4"`` -> (5 x values, 4 y values), each >= 2."""
    a, sep, b = text.lower().partition("x")
    if not sep or not a.strip().isdigit() or not b.strip().isdigit() or int(a) < 2 or int(b) < 2:
        raise SkidpadError(f"{where}: --steps must be NXxNY with both >= 2 (e.g. 5x4), got {text!r}")
    return int(a), int(b)


@dataclass
class EnvelopeOutcome:
    """The grid and what each point scored; arrays have shape (len(ys), len(xs)).

    Attributes
    ----------
    x, y : Axis
    xs, ys : ndarray — grid values [SI]
    completion : fraction of runs that completed
    end_p95 : 95th percentile over runs of end_position_error_m [m] (inf: a run failed outright)
    within : bool, the point meets both criteria
    """

    x: Axis
    y: Axis
    xs: np.ndarray
    ys: np.ndarray
    completion: np.ndarray
    end_p95: np.ndarray
    within: np.ndarray
    runs: int
    tolerance: float

    def fastest(self) -> list[tuple[float, float | None]]:
        """(y, largest x within the envelope or None) for every y value, in grid order."""
        out = []
        for i, y in enumerate(self.ys):
            cols = np.flatnonzero(self.within[i])
            out.append((float(y), float(self.xs[cols[-1]]) if cols.size else None))
        return out


def point_figures(result: JobResult) -> tuple[float, float]:
    """(completion rate, p95 end error [m]) of one grid point; a failed run's error is inf."""
    err = result.figures["end_position_error_m"]
    good = np.isfinite(err) & (np.array(result.status) != "failed")
    big = 1e9  # stands in for inf so the percentile's interpolation stays defined
    p95 = float(np.percentile(np.where(good, err, big), 95))
    # a p95 that reaches into a failed run's error is that run's: infinite
    worst = float(err[good].max()) if good.any() else -math.inf
    return float(result.completed.mean()), (p95 if p95 <= worst else math.inf)


def check_inputs(
    path: str | os.PathLike, *, runs: int, x: str, y: str, tolerance: str | float, overrides: Sequence[str] = ()
) -> tuple[Axis, Axis, float]:
    """Check an envelope's options before any run: (x axis, y axis, tolerance [m]); see :func:`envelope`."""
    where = str(path)
    if runs < 1:
        raise SkidpadError(f"{where}: --runs must be >= 1, got {runs}")
    tol = to_si(tolerance, "length", where=f"{where}: --tolerance")
    if not tol > 0.0:
        raise SkidpadError(f"{where}: --tolerance must be > 0, got {tolerance!r}")
    sc = load_scenario(path, list(overrides))
    ax = parse_axis(x, sc, where=where, option="--x")
    ay = parse_axis(y, sc, where=where, option="--y")
    if ax.key == ay.key:
        raise SkidpadError(f"{where}: --x and --y must be different keys, got {ax.key} twice")
    return ax, ay, tol


def envelope(
    path: str | os.PathLike,
    *,
    runs: int,
    x: str = f"{SPEED_KEY}=0.4..1.2",
    y: str = f"{MU_KEY}=0.5..1.0",
    steps: tuple[int, int] = (5, 4),
    tolerance: str | float = "0.05 m",
    min_completion: float = 0.95,
    overrides: Sequence[str] = (),
    workers: int = 1,
    csv_path: str | os.PathLike | None = None,
    on_point: Callable[[JobResult], None] | None = None,
) -> EnvelopeOutcome:
    """Evaluate every grid point of ``x`` (``KEY=lo..hi``) by ``y`` with ``runs`` runs each.

    Parameters
    ----------
    path : scenario file
    runs : runs per grid point (indices 0..runs-1)
    x, y : ``KEY=lo..hi`` of the two axes (defaults: speed scale and friction)
    steps : grid values along x and y (end points included, evenly spaced)
    tolerance : largest p95 end position error within the envelope [m]
    min_completion : smallest completion rate within the envelope
    overrides : ``--set`` strings applied first
    workers : worker processes
    csv_path : write envelope.csv here (one row per grid point, as each one finishes)
    on_point : called with each grid point's result as it finishes

    Raises
    ------
    SkidpadError — bad axes, steps, tolerance or runs
    """
    ax, ay, tol = check_inputs(path, runs=runs, x=x, y=y, tolerance=tolerance, overrides=overrides)
    where = str(path)
    xs, ys = np.linspace(ax.low, ax.high, steps[0]), np.linspace(ay.low, ay.high, steps[1])
    points = [(i, j) for i in range(len(ys)) for j in range(len(xs))]
    jobs = [Job(n, where, (*overrides, override(ax.key, xs[j]), override(ay.key, ys[i])), tuple(range(runs)))
            for n, (i, j) in enumerate(points)]
    shape = (len(ys), len(xs))
    completion, end_p95 = np.zeros(shape), np.full(shape, np.inf)
    rows = _CsvRows(csv_path, ax.key, ay.key) if csv_path is not None else None

    def done(result: JobResult) -> None:
        i, j = points[result.index]
        completion[i, j], end_p95[i, j] = point_figures(result)
        if rows is not None:
            ok = completion[i, j] >= min_completion and end_p95[i, j] <= tol
            rows.add(xs[j], ys[i], completion[i, j], end_p95[i, j], result, ok)
        if on_point is not None:
            on_point(result)

    try:
        with Evaluator(workers, on_done=done) as ev:
            ev.run(jobs)
    finally:
        if rows is not None:
            rows.close()
    within = (completion >= min_completion) & (end_p95 <= tol)
    return EnvelopeOutcome(ax, ay, xs, ys, completion, end_p95, within, runs, tol)


class _CsvRows:
    """envelope.csv, one row per grid point, flushed as each one finishes."""

    def __init__(self, path: str | os.PathLike, xkey: str, ykey: str) -> None:
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        self.f = open(path, "w", newline="")
        self.w = csv.writer(self.f)
        self.w.writerow([xkey, ykey, "runs", "completion_rate", "end_position_error_p95_m",
                         "end_position_error_mean_m", "cross_track_p95_mean_m", "duration_mean_s", "within", "error"])

    def add(self, x: float, y: float, completion: float, p95: float, r: JobResult, ok: bool) -> None:
        def mean(key: str) -> str:
            v = r.figures[key]
            return repr(float(v.mean())) if np.all(np.isfinite(v)) else ""

        self.w.writerow([repr(float(x)), repr(float(y)), len(r.status), f"{completion:.4f}",
                         repr(p95) if math.isfinite(p95) else "inf", mean("end_position_error_m"),
                         mean("cross_track_p95_m"), mean("duration_s"), str(ok).lower(), r.error])
        self.f.flush()

    def close(self) -> None:
        self.f.close()
