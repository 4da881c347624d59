"""Many runs of many scenarios and sweep points: work units, executors, results on disk, resume.

A work unit is (scenario file, sweep point, chunk of run indices); the runs of one unit are
stepped together as one :class:`~sim.runner.Simulation`. Units are spread over an executor
(:mod:`sim.batch_executors`); the parent appends each finished unit's rows to
``DIR/results.csv`` at once (:mod:`sim.batch_results`) and rewrites ``DIR/summary.csv``.
Because run ``k`` is bit-identical alone or in any batch, the chunking, the executor and
resuming never change a row.
"""

from __future__ import annotations

import itertools
import os
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from planners.errors import SkidpadError
from sim.batch_executors import EXECUTORS, execute
from sim.batch_results import ResultsFile, header, read_results, summarise, write_summary
from sim.scenario import load_scenario


@dataclass(frozen=True)
class WorkUnit:
    """One piece of batch work (picklable).

    Parameters
    ----------
    path : str — scenario file
    overrides : tuple of str — ``--set`` overrides, then the sweep point's ``key=value``
    sweep : tuple of (key, value) — the sweep point (value as given on the command line)
    runs : tuple of int — run indices k of this chunk
    """

    path: str
    overrides: tuple[str, ...]
    sweep: tuple[tuple[str, str], ...]
    runs: tuple[int, ...]


def run_unit(unit: WorkUnit) -> list[dict]:
    """Run one unit; return one scorecard dict per run (with its ``run`` index)."""
    from sim.runner import Simulation

    sc = load_scenario(unit.path, list(unit.overrides))
    return [{"run": r.run, **r.scorecard} for r in Simulation(sc, runs=list(unit.runs)).run()]


def parse_sweeps(sweeps: Sequence[str]) -> list[tuple[tuple[str, str], ...]]:
    """Sweep points of ``key=v1,v2`` options: the cartesian product, in the order given."""
    axes: list[list[tuple[str, str]]] = []
    seen: set[str] = set()
    for s in sweeps:
        key, sep, values = s.partition("=")
        key = key.strip()
        vals = [v.strip() for v in values.split(",") if v.strip()]
        if not sep or not key or not vals:
            raise SkidpadError(f"--sweep must be key=v1,v2,..., got {s!r}")
        if key in seen:
            raise SkidpadError(f"--sweep keys must be distinct, got {key!r} twice")
        seen.add(key)
        axes.append([(key, v) for v in vals])
    return [tuple(p) for p in itertools.product(*axes)]


def group_name(stem: str, sweep: Sequence[tuple[str, str]]) -> str:
    """File-safe name of a (scenario, sweep point) group: ``<stem>[__key-value...]``."""
    parts = [stem] + [re.sub(r"[^A-Za-z0-9.+-]+", "-", f"{k}-{v}").strip("-") for k, v in sweep]
    return "__".join(parts)


@dataclass
class Group:
    """A scenario file at one sweep point, loaded once in the parent."""

    path: str
    stem: str
    sweep: tuple[tuple[str, str], ...]
    overrides: tuple[str, ...]
    scenario: object
    name: str

    @property
    def seed(self) -> int:
        return int(self.scenario.run.seed)

    def key(self) -> tuple:
        return (self.stem, *(v for _, v in self.sweep))


@dataclass
class BatchOutcome:
    """What a batch left on disk, read back: rows of results.csv and the summary."""

    out: Path
    rows: list[dict]
    summary: list[dict]
    sweep_keys: list[str]
    ran: int = 0
    failures: int = 0
    traces: list[Path] = field(default_factory=list)


def make_groups(scenarios: Sequence[str | os.PathLike], sweeps: Sequence[str], overrides: Sequence[str]) -> list[Group]:
    """Load every (scenario, sweep point) once; input errors are raised before any run."""
    points = parse_sweeps(sweeps)
    groups = []
    stems = [Path(p).stem for p in scenarios]
    if len(set(stems)) != len(stems):
        raise SkidpadError(f"SCENARIO file names must be distinct, got {', '.join(stems)}")
    for path, stem in zip(scenarios, stems):
        for point in points:
            ov = (*overrides, *(f"{k}={v}" for k, v in point))
            sc = load_scenario(path, list(ov))
            groups.append(Group(str(path), stem, point, ov, sc, group_name(stem, point)))
    return groups


def plan_units(groups: Sequence[Group], runs: int | None, chunk: int, done: set[tuple]) -> list[WorkUnit]:
    """Work units of the (group, run) pairs not in ``done``, ``chunk`` runs at most each."""
    if chunk < 1:
        raise SkidpadError(f"--chunk must be >= 1, got {chunk}")
    units = []
    for g in groups:
        n = runs if runs is not None else int(g.scenario.run.runs)
        if n < 1:
            raise SkidpadError(f"--runs must be >= 1, got {n}")
        todo = [k for k in range(n) if (*g.key(), k) not in done]
        for i in range(0, len(todo), chunk):
            units.append(WorkUnit(g.path, g.overrides, g.sweep, tuple(todo[i:i + chunk])))
    return units


def _row_key(row: dict, sweep_keys: Sequence[str]) -> tuple:
    return (row["scenario"], *(str(row.get(k, "")) for k in sweep_keys), row["run"])


def _failed_rows(runs: Sequence[int], exc: BaseException) -> list[dict]:
    cause = f"{type(exc).__name__}: {exc}"
    return [{"run": k, "status": "failed", "completed": False, "status_cause": cause} for k in runs]


def run_batch(
    scenarios: Sequence[str | os.PathLike],
    *,
    out: str | os.PathLike,
    runs: int | None = None,
    sweeps: Sequence[str] = (),
    overrides: Sequence[str] = (),
    executor: str = "serial",
    jobs: int = 1,
    scheduler: str | None = None,
    client: object | None = None,
    resume: bool = False,
    keep_traces: str = "none",
    chunk: int = 256,
    work: Callable[[WorkUnit], list[dict]] = run_unit,
    on_unit: Callable[[int, int], None] | None = None,
    pool: object | None = None,
) -> BatchOutcome:
    """Run ``runs`` runs of every scenario at every sweep point; write results under ``out``.

    Parameters
    ----------
    scenarios : scenario TOML files (distinct file names)
    out : folder for results.csv, summary.csv, summary.png, scenarios/, traces/
    runs : runs per (scenario, sweep point); default each scenario's ``run.runs``
    sweeps : ``key=v1,v2,...`` strings; their cartesian product is swept
    overrides : ``key=value`` strings applied to every scenario (as ``--set``)
    executor : "serial" | "processes" | "dask"
    jobs : worker processes (processes, dask LocalCluster)
    scheduler : dask scheduler address ``tcp://host:port``; client : a dask Client to use as is
    resume : keep the rows already in results.csv and run only the missing ones
    keep_traces : "none" | "worst:K" (K largest cross_track_max_m per group) | "runs:0,3"
    chunk : most runs stepped together in one Simulation
    work : the function run per unit (module level, so it pickles)
    on_unit : called as ``on_unit(runs_done, failures)`` after each unit is written
    pool : a started process pool for the processes executor
        (:func:`sim.batch_executors.make_pool`; the caller shuts it down), else one is made

    Returns
    -------
    BatchOutcome — rows and summary read back from disk

    Raises
    ------
    SkidpadError — bad options, a results.csv with another header, a missing dask extra
    """
    from sim.commands.run import write_resolved

    if executor not in EXECUTORS:
        raise SkidpadError(f"--executor must be one of {', '.join(EXECUTORS)}, got {executor!r}")
    if jobs < 1:
        raise SkidpadError(f"--jobs must be >= 1, got {jobs}")
    keep = parse_keep(keep_traces)
    groups = make_groups(scenarios, sweeps, overrides)
    sweep_keys = [k for k, _ in groups[0].sweep] if groups else []
    out = Path(out)
    (out / "scenarios").mkdir(parents=True, exist_ok=True)
    for g in groups:
        write_resolved(g.scenario, g.seed, out / "scenarios", name=f"{g.name}.toml")
    results_path = out / "results.csv"
    if results_path.exists() and not resume:
        raise SkidpadError(f"{results_path}: the file must be absent without --resume, got an existing file")
    _, old = read_results(results_path)
    done = {_row_key(r, sweep_keys) for r in old}
    units = plan_units(groups, runs, chunk, done)
    seeds = {(g.path, g.sweep): (g.stem, g.seed) for g in groups}
    columns = header(sweep_keys)
    rows = list(old)
    outcome = BatchOutcome(out, rows, [], sweep_keys)
    writer = ResultsFile(results_path, columns)
    finished = execute(units, work, executor=executor, jobs=jobs, scheduler=scheduler, client=client, pool=pool)
    try:
        for unit, result, exc in finished:
            stem, seed = seeds[(unit.path, unit.sweep)]
            unit_rows = result if exc is None else _failed_rows(unit.runs, exc)
            full = [{"scenario": stem, "seed": seed, **dict(unit.sweep), **r} for r in unit_rows]
            full = [{c: r.get(c, "") for c in columns} for r in full]
            writer.append(full)
            rows.extend(full)
            outcome.ran += len(full)
            outcome.failures += sum(r["status"] == "failed" for r in full)
            write_summary(out / "summary.csv", summarise(rows, sweep_keys), sweep_keys)
            if on_unit is not None:
                on_unit(outcome.ran, outcome.failures)
    finally:
        finished.close()  # stop the workers now, also on Ctrl-C
        writer.close()
        # rewrite from what is on disk, also after Ctrl-C
        _, outcome.rows = read_results(results_path)
        outcome.summary = summarise(outcome.rows, sweep_keys)
        write_summary(out / "summary.csv", outcome.summary, sweep_keys)
    _box_plot(outcome)
    outcome.traces = keep_traces_for(groups, outcome.rows, keep, out / "traces", sweep_keys)
    return outcome


def parse_keep(text: str) -> tuple[str, list[int]]:
    """``none`` | ``worst:K`` | ``runs:0,3`` -> (mode, numbers)."""
    mode, _, rest = text.partition(":")
    try:
        nums = [int(x) for x in rest.split(",") if x.strip()]
    except ValueError:
        nums = None
    if mode == "none" and not rest:
        return "none", []
    if mode == "worst" and nums is not None and len(nums) == 1 and nums[0] >= 0:
        return "worst", nums
    if mode == "runs" and nums and all(n >= 0 for n in nums):
        return "runs", nums
    raise SkidpadError(f"--keep-traces must be none, worst:K or runs:0,3, got {text!r}")


def keep_traces_for(groups, rows, keep, folder: Path, sweep_keys) -> list[Path]:
    """Re-run the chosen runs with their trace kept (exact: runs are deterministic)."""
    from sim.runner import Simulation

    mode, nums = keep
    if mode == "none":
        return []
    written = []
    for g in groups:
        mine = [r for r in rows if _row_key(r, sweep_keys)[:-1] == tuple(str(x) for x in g.key())
                and r["status"] != "failed"]
        if mode == "worst":
            ranked = sorted((r for r in mine if isinstance(r["cross_track_max_m"], float)),
                            key=lambda r: (-r["cross_track_max_m"], r["run"]))
            chosen = [r["run"] for r in ranked[: nums[0]]]
        else:
            have = {r["run"] for r in mine}
            chosen = [k for k in nums if k in have]
        folder.mkdir(parents=True, exist_ok=True)
        for k in chosen:
            sim = Simulation(g.scenario, runs=[k], keep=[k])
            sim.run()
            path = folder / f"{g.name}__run{k}.npz"
            sim.trace().save(path)
            written.append(path)
    return written


def _box_plot(outcome: BatchOutcome) -> None:
    from sim.report import box_plot

    keys = ["cross_track_p95_m", "end_position_error_m"]
    groups: dict[str, dict[str, list[float]]] = {}
    for r in outcome.rows:
        name = group_name(r["scenario"], [(k, str(r.get(k, ""))) for k in outcome.sweep_keys])
        g = groups.setdefault(name, {k: [] for k in keys})
        for k in keys:
            if isinstance(r.get(k), float):
                g[k].append(r[k])
    if groups:
        box_plot(groups, keys, outcome.out / "summary.png")


__all__ = ["WorkUnit", "BatchOutcome", "run_batch", "run_unit", "parse_sweeps", "parse_keep"]
