"""Tune scenario keys: minimise a batch objective over a box with differential evolution.

Each candidate (a value for every ``--param`` key) is one :class:`~sim.runner.Simulation` of
runs ``0..N-1`` of the scenario's seed, so every candidate meets the same robots, noise and
disturbances (common random numbers) and differences between candidates are the keys' doing.

The objective of a candidate is a statistic over its N runs of a per-run score
(:data:`OBJECTIVES`). A run that did not complete (timeout, diverged, collided, or a candidate
whose route cannot be timed) scores ``max(figure, penalty)``: for the error objectives the
penalty is ``fail_penalty`` (default 1 m, far above any error of a run that completes); for
``duration`` it is the run's timeout. A candidate is therefore never better for failing.

The search is :func:`scipy.optimize.differential_evolution` (Storn and Price, 1997) with
deferred updating, so each generation's candidates are evaluated together, in parallel on
``workers`` processes. At most ``budget`` candidates are evaluated: the population and the
number of generations are sized from the budget, and a counter refuses any candidate past it.
When the scenario's starting values lie inside the box they are the first member of the
initial population (``x0``), so the start is one of the budgeted candidates.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from planners.errors import SkidpadError
from sim.param_eval import Evaluator, Job, JobResult
from sim.param_space import Axis, override, parse_axis
from sim.scenario import Scenario, load_scenario
from sim.units import to_si


@dataclass(frozen=True)
class Objective:
    """A per-run scorecard figure and the statistic over runs that the search minimises."""

    figure: str
    statistic: str  # "mean" | "p95"
    unit: str


OBJECTIVES = {
    "cross_track_p95": Objective("cross_track_p95_m", "mean", "m"),
    "end_error_p95": Objective("end_position_error_m", "p95", "m"),
    "duration": Objective("duration_s", "mean", "s"),
}


def describe_objective(name: str) -> str:
    """One line saying what the objective is."""
    o = OBJECTIVES[name]
    stat = "mean over runs" if o.statistic == "mean" else "95th percentile over runs"
    return f"{stat} of {o.figure} [{o.unit}]"


def run_scores(result: JobResult, name: str, penalty: float) -> np.ndarray:
    """Per-run scores, shape (N,): the figure, or ``max(figure, penalty)`` for a run that did not complete.

    For ``duration`` the penalty is the job's timeout (``penalty`` when the job raised).
    """
    o = OBJECTIVES[name]
    fig = result.figures[o.figure]
    if o.figure == "duration_s":
        penalty = result.timeout if math.isfinite(result.timeout) else penalty
    bad = ~result.completed | ~np.isfinite(fig)
    return np.where(bad, np.maximum(np.nan_to_num(fig, nan=penalty, posinf=penalty), penalty), fig)


def statistic(scores: np.ndarray, name: str, axis: int = -1) -> np.ndarray | float:
    """The objective's statistic over runs (last axis)."""
    if OBJECTIVES[name].statistic == "mean":
        return np.mean(scores, axis=axis)
    return np.percentile(scores, 95, axis=axis)


#: the method :func:`improvement_interval` names when every run scored the same
IDENTICAL = "none (every run scored the same)"


def improvement_interval(start: np.ndarray, best: np.ndarray, name: str, *, seed: int = 0) -> tuple[float, float, float, str]:
    """Improvement ``objective(start) - objective(best)`` with a 95 % interval from paired runs.

    Mean objectives: mean of the paired differences +- t(0.975, N-1) standard errors (Student
    t; about 1.96 SE for large N). The p95 objective: a paired bootstrap percentile interval
    (runs resampled together for both candidates; :func:`scipy.stats.bootstrap`, 2000 resamples).

    When every run of both candidates scored the same (runs that carry no randomness: no
    ``[run.vary]`` and no noise that reaches the score) there is no spread to put an interval on:
    low and high are nan and the method is :data:`IDENTICAL`.

    Returns
    -------
    (improvement, low, high, method) — in the objective's unit; method says which interval
    """
    from scipy import stats

    n = len(start)
    value = float(statistic(start, name) - statistic(best, name))
    if n < 2:
        return value, math.nan, math.nan, "none (one run)"
    if np.all(start == start[0]) and np.all(best == best[0]):
        return value, math.nan, math.nan, IDENTICAL
    if OBJECTIVES[name].statistic == "mean":
        d = start - best
        half = float(stats.t.ppf(0.975, n - 1) * np.std(d, ddof=1) / math.sqrt(n))
        return value, value - half, value + half, "paired mean difference +- t SE"
    res = stats.bootstrap(
        (start, best), lambda a, b, axis=-1: statistic(a, name, axis) - statistic(b, name, axis),
        paired=True, vectorized=True, n_resamples=2000, method="percentile", rng=np.random.default_rng(seed),
    )
    return value, float(res.confidence_interval.low), float(res.confidence_interval.high), "paired bootstrap"


def population_for(budget: int, dims: int) -> tuple[int, int]:
    """(population members, generations after the first) that fit in ``budget`` evaluations.

    The population is ``15 * dims`` members (scipy's default multiplier) but at most a third
    of the budget, and at least 5 (scipy's smallest); the last generation may be cut short.
    """
    members = max(5, min(15 * dims, budget // 3))
    return members, max(0, math.ceil(budget / members) - 1)


@dataclass
class Candidate:
    """One evaluated candidate: its values (SI, in ``--param`` order), scores and objective."""

    index: int
    generation: int
    values: tuple[float, ...]
    scores: np.ndarray
    objective: float
    completion: float
    error: str = ""


@dataclass
class TuneOutcome:
    """What a tune found."""

    axes: list[Axis]
    objective: str
    runs: int
    candidates: list[Candidate] = field(default_factory=list)
    start: Candidate | None = None

    @property
    def best(self) -> Candidate:
        """The candidate with the lowest objective (the first one on a tie)."""
        return min(self.candidates, key=lambda c: (c.objective, c.index))


def check_inputs(
    path: str | os.PathLike,
    params: Sequence[str],
    *,
    runs: int,
    objective: str,
    budget: int,
    overrides: Sequence[str] = (),
    fail_penalty: str | float = "1 m",
) -> tuple[Scenario, list[Axis], float]:
    """Check a tune's options before any run: (scenario, axes, fail penalty [m]); see :func:`tune`."""
    where = str(path)
    if objective not in OBJECTIVES:
        raise SkidpadError(f"{where}: --objective must be one of {', '.join(OBJECTIVES)}, got {objective!r}")
    if runs < 1:
        raise SkidpadError(f"{where}: --runs must be >= 1, got {runs}")
    if budget < 5:
        raise SkidpadError(f"{where}: --budget must be >= 5 (the smallest population differential evolution uses), got {budget}")
    if not params:
        raise SkidpadError(f"{where}: --param must be given at least once (KEY=low..high)")
    sc = load_scenario(path, list(overrides))
    axes = [parse_axis(p, sc, where=where, option="--param") for p in params]
    keys = [a.key for a in axes]
    if len(set(keys)) != len(keys):
        raise SkidpadError(f"{where}: --param keys must be distinct, got {', '.join(keys)}")
    penalty = to_si(fail_penalty, "length", where=f"{where}: --fail-penalty")
    if not penalty > 0.0:
        raise SkidpadError(f"{where}: --fail-penalty must be > 0, got {fail_penalty!r}")
    return sc, axes, penalty


def tune(
    path: str | os.PathLike,
    params: Sequence[str],
    *,
    runs: int,
    objective: str,
    budget: int,
    overrides: Sequence[str] = (),
    workers: int = 1,
    fail_penalty: str | float = "1 m",
    seed: int = 0,
    csv_path: str | os.PathLike | None = None,
    on_candidate: Callable[[Candidate], None] | None = None,
) -> TuneOutcome:
    """Minimise ``objective`` over the box of ``params`` within ``budget`` candidates.

    Parameters
    ----------
    path : scenario file
    params : ``KEY=lo..hi`` strings, e.g. ``"tracker.lookahead=0.1m..0.6m"``
    runs : runs per candidate (indices 0..runs-1 of the scenario's seed)
    objective : a key of :data:`OBJECTIVES`
    budget : most candidates evaluated (>= 5)
    overrides : ``--set`` strings applied first
    workers : worker processes
    fail_penalty : score of a run that did not complete, for the error objectives [m]
    seed : seed of the search itself (differential evolution's draws)
    csv_path : append one row per candidate here as it finishes (tune.csv)
    on_candidate : called with each candidate as it finishes

    Raises
    ------
    SkidpadError — bad options or ranges; a scenario whose starting values fail every run
    """
    from scipy.optimize import differential_evolution

    _, axes, penalty = check_inputs(path, params, runs=runs, objective=objective, budget=budget,
                                     overrides=overrides, fail_penalty=fail_penalty)
    where = str(path)
    keys = [a.key for a in axes]
    out = TuneOutcome(axes, objective, runs)
    run_ids = tuple(range(runs))
    writer = _CsvRows(csv_path, keys) if csv_path is not None else None
    generation = [0]

    def job(i: int, values: Sequence[float] | None) -> Job:
        extra = () if values is None else tuple(override(k, v) for k, v in zip(keys, values))
        return Job(i, str(path), (*overrides, *extra), run_ids)

    timeouts = [math.inf]  # duration: a candidate that raised scores the longest timeout seen

    def record(result: JobResult, values: tuple[float, ...]) -> Candidate:
        if math.isfinite(result.timeout):
            timeouts.append(result.timeout)
        worst = max(t for t in timeouts if math.isfinite(t)) if len(timeouts) > 1 else math.inf
        scores = run_scores(result, objective, worst if objective == "duration" else penalty)
        cand = Candidate(result.index, generation[0], values, scores, float(statistic(scores, objective)),
                         float(result.completed.mean()), result.error)
        if writer is not None:
            writer.add(cand)
        if on_candidate is not None:
            on_candidate(cand)
        return cand

    starts = [a.start for a in axes]
    inside = all(s is not None and a.low <= s <= a.high for s, a in zip(starts, axes))
    members, generations = population_for(budget, len(axes))
    try:
        with Evaluator(workers) as ev:
            if not inside:  # the start is outside the box: one extra, unbudgeted evaluation
                out.start = record(ev.run([job(-1, None)])[0], tuple(math.nan if s is None else s for s in starts))

            def func(x: np.ndarray) -> np.ndarray:
                cols = [tuple(float(v) for v in x[:, j]) for j in range(x.shape[1])]
                room = max(0, budget - len(out.candidates))
                n0 = len(out.candidates)
                results = ev.run([job(n0 + j, c) for j, c in enumerate(cols[:room])])
                energies = np.full(len(cols), np.inf)  # refused past the budget: never accepted
                for j, (res, c) in enumerate(zip(results, cols)):
                    out.candidates.append(record(res, c))
                    energies[j] = out.candidates[-1].objective
                generation[0] += 1
                return energies

            differential_evolution(
                func, [(a.low, a.high) for a in axes], popsize=math.ceil(members / len(axes)),
                maxiter=generations, tol=0.0, polish=False, updating="deferred", vectorized=True,
                x0=np.array(starts, dtype=float) if inside else None, rng=np.random.default_rng(seed),
            )
    finally:
        if writer is not None:
            writer.close()
    if out.start is None:
        out.start = out.candidates[0]
    if out.start.completion == 0.0:
        raise SkidpadError(f"{where}: every run of the scenario as given failed ({out.start.error or 'no run completed'}); "
                           "fix the scenario before tuning it")
    return out


class _CsvRows:
    """tune.csv, one row per candidate, flushed as each one finishes.

    Values are SI; candidate -1 is the scenario as given when its values lie outside the box
    (then evaluated once more, outside the budget).
    """

    def __init__(self, path: str | os.PathLike, keys: Sequence[str]) -> None:
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        self.f = open(path, "w", newline="")
        self.keys = list(keys)
        self.w = csv.writer(self.f)
        self.w.writerow(["candidate", "generation", *self.keys, "objective", "completion_rate", "error"])

    def add(self, c: Candidate) -> None:
        self.w.writerow([c.index, c.generation, *(repr(v) for v in c.values), repr(c.objective),
                         f"{c.completion:.4f}", c.error])
        self.f.flush()

    def close(self) -> None:
        self.f.close()


def read_tune_csv(path: str | os.PathLike) -> list[dict]:
    """Rows of a tune.csv with numbers as floats (for plots and tests)."""
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    return [{k: (v if k == "error" else float(v)) for k, v in r.items()} for r in rows]
