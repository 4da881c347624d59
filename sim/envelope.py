"""Speed envelope: how many runs arrive, cleanly, over a grid of two scenario keys.

The default grid is route speed scale (``route.speed_scale``, the route time-scaled: speeds x c,
accelerations x c^2) against floor friction (``robot.traction.mu``, the robot's wheel-floor
friction coefficient; a field's ``friction_scale`` and patches still multiply it). Any two
numeric keys may replace them. Each grid point is one :class:`~sim.runner.Simulation` of runs
``0..N-1`` of the scenario's seed, the same runs at every point (common random numbers).

A run *succeeds* when it completes (status "completed"), touched no wall or obstacle
(``collisions == 0``; a scenario's ``run.collision = "continue"`` lets a run that hit something
go on and complete) and never left its path by more than ``max_cross_track``
(``cross_track_max_m``; default half the robot's footprint width, beyond which the robot's body
no longer covers its path line: it is driving somewhere else, e.g. round the wrong side of an
obstacle). A grid point is *within the envelope* when at least ``min_completion`` (95 %) of
its runs succeed and the 95th percentile over all N runs of ``end_position_error_m`` is at
most ``tolerance`` (a run whose point could not be set up, e.g. a route that cannot be timed,
counts as an infinite error).

For each y value the envelope reports the fastest safe x read monotonically: the largest x
such that it and every smaller grid x are within the envelope (a cell that qualifies above a
failing one is not trusted), flagged when it is the top of the grid (the answer is "at least
x") or when even the smallest x fails.
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


@dataclass(frozen=True)
class Fastest:
    """The fastest safe x at one y value (see the module docstring).

    Attributes
    ----------
    y : float — the y value [SI]
    x : float or None — largest x such that it and every smaller grid x are within the
        envelope [SI]; None when the smallest x is not
    at_top : bool — x is the largest grid value: the true limit is at least x (widen the range)
    above : tuple of float — grid x values above ``x`` that are within the envelope although a
        smaller one is not (a non-monotone column; not trusted)
    """

    y: float
    x: float | None
    at_top: bool
    above: tuple[float, ...]


@dataclass
class EnvelopeOutcome:
    """The grid and what each point scored; arrays have shape (len(ys), len(xs)).

    Attributes
    ----------
    x, y : Axis
    xs, ys : ndarray — grid values [SI]
    completion : fraction of runs whose status is "completed"
    success : fraction of runs that completed, did not collide and stayed within
        ``max_cross_track`` of the path
    end_p95 : 95th percentile over runs of end_position_error_m [m] (inf: a run failed outright)
    within : bool, the point meets both criteria (success rate and p95 end error)
    runs : runs per point
    tolerance : largest p95 end error within the envelope [m]
    max_cross_track : largest cross_track_max_m of a successful run [m]
    """

    x: Axis
    y: Axis
    xs: np.ndarray
    ys: np.ndarray
    completion: np.ndarray
    success: np.ndarray
    end_p95: np.ndarray
    within: np.ndarray
    runs: int
    tolerance: float
    max_cross_track: float

    def fastest(self) -> list[Fastest]:
        """The fastest safe x for every y value, in grid order (monotone reading)."""
        out = []
        for i, y in enumerate(self.ys):
            row = self.within[i]
            failing = np.flatnonzero(~row)
            first_fail = int(failing[0]) if failing.size else len(row)
            x = float(self.xs[first_fail - 1]) if first_fail > 0 else None
            above = tuple(float(v) for v in self.xs[first_fail:][row[first_fail:]])
            out.append(Fastest(float(y), x, first_fail == len(row), above))
        return out


@dataclass(frozen=True)
class PointFigures:
    """What one grid point scored (rates are fractions of its runs)."""

    completion: float  # status "completed"
    collided: int  # runs with at least one collision
    off_path: int  # runs whose cross_track_max_m exceeds the bound
    success: float  # completed, no collision, on the path
    end_p95: float  # [m]; inf when the p95 reaches a run that failed outright


def point_figures(result: JobResult, max_cross_track: float) -> PointFigures:
    """Figures of one grid point; a run that failed outright has an infinite end error.

    Parameters
    ----------
    result : the grid point's runs
    max_cross_track : largest ``cross_track_max_m`` of a run that stays on its path [m]
    """
    err = result.figures["end_position_error_m"]
    good = np.isfinite(err) & (np.array(result.status) != "failed")
    big = 1e9  # stands in for inf so the percentile's interpolation stays defined
    p95 = float(np.percentile(np.where(good, err, big), 95))
    # a p95 that reaches into a failed run's error is that run's: infinite
    worst = float(err[good].max()) if good.any() else -math.inf
    collided = result.figures["collisions"] > 0
    off_path = ~(result.figures["cross_track_max_m"] <= max_cross_track)  # nan counts as off
    ok = result.completed & ~collided & ~off_path
    return PointFigures(
        completion=float(result.completed.mean()), collided=int(np.sum(collided & good)),
        off_path=int(np.sum(off_path & good)), success=float(ok.mean()),
        end_p95=p95 if p95 <= worst else math.inf,
    )


def check_inputs(
    path: str | os.PathLike,
    *,
    runs: int,
    x: str,
    y: str,
    tolerance: str | float,
    overrides: Sequence[str] = (),
    max_cross_track: str | float | None = None,
) -> tuple[Axis, Axis, float, float]:
    """Check an envelope's options before any run: (x axis, y axis, tolerance [m], max cross-track
    [m]); see :func:`envelope`."""
    where = str(path)
    if runs < 1:
        raise SkidpadError(f"{where}: --runs must be >= 1, got {runs}")
    tol = _positive_length(tolerance, where, "--tolerance")
    sc = load_scenario(path, list(overrides))
    bound = sc.robot.footprint[1] / 2.0 if max_cross_track is None else \
        _positive_length(max_cross_track, where, "--max-cross-track")
    ax = parse_axis(x, sc, where=where, option="--x")
    ay = parse_axis(y, sc, where=where, option="--y")
    if ax.key == ay.key:
        raise SkidpadError(f"{where}: --x and --y must be different keys, got {ax.key} twice")
    return ax, ay, tol, bound


def _positive_length(value: str | float, where: str, option: str) -> float:
    v = to_si(value, "length", where=f"{where}: {option}")
    if not v > 0.0:
        raise SkidpadError(f"{where}: {option} must be a length > 0, got {value!r}")
    return v


def envelope(
    path: str | os.PathLike,
    *,
    runs: int,
    x: str = f"{SPEED_KEY}=0.4..1.2",
    y: str = f"{MU_KEY}=0.5..1.0",
    steps: tuple[int, int] = (5, 4),
    tolerance: str | float = "0.05 m",
    max_cross_track: str | float | None = None,
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
    max_cross_track : largest ``cross_track_max_m`` of a successful run [m] (default: half the
        robot's footprint width)
    min_completion : smallest success rate within the envelope
    overrides : ``--set`` strings applied first
    workers : worker processes
    csv_path : write envelope.csv here (one row per grid point, as each one finishes)
    on_point : called with each grid point's result as it finishes

    Raises
    ------
    SkidpadError — bad axes, steps, tolerance or runs
    """
    ax, ay, tol, bound = check_inputs(path, runs=runs, x=x, y=y, tolerance=tolerance, overrides=overrides,
                                      max_cross_track=max_cross_track)
    where = str(path)
    xs, ys = np.linspace(ax.low, ax.high, steps[0]), np.linspace(ay.low, ay.high, steps[1])
    points = [(i, j) for i in range(len(ys)) for j in range(len(xs))]
    jobs = [Job(n, where, (*overrides, override(ax.key, xs[j]), override(ay.key, ys[i])), tuple(range(runs)))
            for n, (i, j) in enumerate(points)]
    shape = (len(ys), len(xs))
    completion, success, end_p95 = np.zeros(shape), np.zeros(shape), np.full(shape, np.inf)
    rows = _CsvRows(csv_path, ax.key, ay.key) if csv_path is not None else None

    def done(result: JobResult) -> None:
        i, j = points[result.index]
        f = point_figures(result, bound)
        completion[i, j], success[i, j], end_p95[i, j] = f.completion, f.success, f.end_p95
        if rows is not None:
            rows.add(xs[j], ys[i], f, result, f.success >= min_completion and f.end_p95 <= tol)
        if on_point is not None:
            on_point(result)

    try:
        with Evaluator(workers, on_done=done) as ev:
            ev.run(jobs)
    finally:
        if rows is not None:
            rows.close()
    within = (success >= min_completion) & (end_p95 <= tol)
    return EnvelopeOutcome(ax, ay, xs, ys, completion, success, end_p95, within, runs, tol, bound)


class _CsvRows:
    """envelope.csv, one row per grid point, flushed as each one finishes; numbers are plain
    decimals (``inf`` for an infinite error, empty when a figure is missing)."""

    def __init__(self, path: str | os.PathLike, xkey: str, ykey: str) -> None:
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        self.f = open(path, "w", newline="")
        self.w = csv.writer(self.f)
        self.w.writerow([xkey, ykey, "runs", "completion_rate", "collided_runs", "off_path_runs", "success_rate",
                         "end_position_error_p95_m", "end_position_error_mean_m", "cross_track_p95_mean_m",
                         "cross_track_max_m", "duration_mean_s", "within", "error"])

    def add(self, x: float, y: float, f: PointFigures, r: JobResult, ok: bool) -> None:
        def stat(key: str, how=np.mean) -> str:
            v = r.figures[key]
            return _number(how(v)) if v.size and np.all(np.isfinite(v)) else ""

        self.w.writerow([_number(x), _number(y), len(r.status), f"{f.completion:.4f}", f.collided, f.off_path,
                         f"{f.success:.4f}", _number(f.end_p95), stat("end_position_error_m"),
                         stat("cross_track_p95_m"), stat("cross_track_max_m", np.max), stat("duration_s"),
                         str(ok).lower(), r.error])
        self.f.flush()

    def close(self) -> None:
        self.f.close()


def _number(v: float) -> str:
    """A plain decimal that float() reads back exactly ("inf" for infinity)."""
    return repr(float(v)) if math.isfinite(v) else ("inf" if v > 0 else "-inf" if v < 0 else "nan")
