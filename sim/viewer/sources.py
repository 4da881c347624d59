"""Where scenes come from: a running simulation, a saved trace, a run or batch folder.

A run folder (``skidpad run --out DIR``) holds ``trace.npz``, ``scorecard.json`` and the
resolved ``scenario.toml``; a batch folder holds ``traces/*.npz``, ``scenarios/*.toml`` and
``results.csv``. Any folder with one or more trace files and a scenario file beside them (or
in ``scenarios/``) replays; statuses come from ``scorecard.json`` or ``results.csv`` when
present. No pygame here.
"""

from __future__ import annotations

import csv
import json
import time
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np

from planners.errors import ScenarioError, did_you_mean
from planners.plan import Plan
from sim.scenario import Scenario, load_scenario, read_toml
from sim.trace import Trace
from sim.viewer.scene import Scene, Track, path_from_plan, path_from_reference, tracks_of


def plan_path(scenario: Scenario, plan: Plan | None, track: Track, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """The path to draw: from ``plan``, else from the runner's plan, else the recorded reference."""
    if plan is None:
        try:
            from sim.runner import make_plan
        except ImportError:  # a tree without the runner still replays, from the reference channel
            return path_from_reference(track, dt)
        plan = make_plan(scenario)
    return path_from_plan(plan)


def scene_from_trace(
    trace: Trace, scenario: Scenario, plan: Plan | None = None, *, statuses: Sequence[str] | None = None,
    label: str = "", highlight_run: int | None = None,
) -> Scene:
    """A replay scene of every robot recorded in ``trace``."""
    return _scene(scenario, tracks_of(trace, label=label, statuses=statuses), _dt(trace, scenario), plan,
                  highlight_run, where=label or "trace")


def _dt(trace: Trace, scenario: Scenario) -> float:
    return float(trace.meta.get("dt", 1.0 / scenario.run.rate))


def _scene(
    scenario: Scenario, tracks: list[Track], dt: float, plan: Plan | None, highlight_run: int | None, *, where: str
) -> Scene:
    if not tracks:
        raise ScenarioError(f"{where}: a trace must hold at least one recorded run, got none")
    highlight = 0
    if highlight_run is not None:
        hits = [i for i, tr in enumerate(tracks) if tr.run == highlight_run]
        if not hits:
            runs = sorted({tr.run for tr in tracks})
            raise ScenarioError(f"{where}: --run must be one of the recorded runs {_short(runs)}, got {highlight_run}")
        highlight = hits[0]
    xy, speed = plan_path(scenario, plan, tracks[highlight], dt)
    return Scene(scenario=scenario, tracks=tracks, dt=dt, path=xy, path_speed=speed, highlight=highlight,
                 title=scenario.title)


def _short(values: list[int]) -> str:
    return str(values) if len(values) <= 8 else f"[{values[0]} .. {values[-1]}] ({len(values)} runs)"


# ---------------------------------------------------------------------- saved runs


def _scenario_files(folders: Sequence[Path]) -> list[Path]:
    out: list[Path] = []
    for folder in folders:
        for p in sorted(folder.glob("*.toml")):
            if p not in out and "robot" in read_toml(p):
                out.append(p)
    return out


def _statuses(folder: Path, trace: Trace, names: set[str]) -> list[str] | None:
    card = folder / "scorecard.json"
    if card.is_file() and len(trace.runs) == 1:
        try:
            return [str(json.loads(card.read_text()).get("status", ""))]
        except (OSError, ValueError):
            return None
    for table in (folder / "results.csv", folder.parent / "results.csv"):
        if table.is_file():
            with open(table, newline="") as f:
                rows = {int(r["run"]): r.get("status", "") for r in csv.DictReader(f)
                        if r.get("run", "").isdigit() and (not r.get("scenario") or r["scenario"] in names)}
            return [rows.get(int(k), "") for k in trace.runs]
    return None


def load_replay(path: str | Path, *, scenario: str | None = None, highlight_run: int | None = None) -> Scene:
    """Open a trace file, a run folder or a batch folder for replay.

    Parameters
    ----------
    path : a ``.npz`` trace, or a folder holding traces (``*.npz`` or ``*/*.npz``)
    scenario : the scenario file to use, or the name (file stem or title) of one found beside
        the traces; needed only when there is none or more than one
    highlight_run : run index k to highlight (default: the first recorded)

    Raises
    ------
    ScenarioError
        No traces, no scenario, several scenarios and none chosen, traces of different rates.
    """
    p = Path(path)
    if p.is_dir():
        files = sorted(p.glob("*.npz")) + sorted(p.glob("*/*.npz"))
        folders = [p, p / "scenarios", *sorted({f.parent for f in files})]
    elif p.is_file():
        files = [p]
        folders = [p.parent, p.parent.parent / "scenarios", p.parent.parent]
    else:
        raise ScenarioError(f"{p}: no such file or folder")
    if not files:
        raise ScenarioError(f"{p}: a replay folder must hold trace .npz files (trace.npz or traces/*.npz), got none")
    traces = [(f, Trace.load(f)) for f in files]
    sc = _pick_scenario(p, scenario, [f for f in folders if f.is_dir()], {t.meta.get("scenario", "") for _, t in traces})
    names = {sc.title, Path(sc.source).stem}
    tracks: list[Track] = []
    dts = set()
    for f, tr in traces:
        if tr.meta.get("scenario") not in (None, "", sc.title):
            continue
        dts.add(round(_dt(tr, sc), 12))
        tracks += tracks_of(tr, label=f.stem, statuses=_statuses(f.parent, tr, names))
    if len(dts) > 1:
        raise ScenarioError(f"{p}: traces must share one control rate to replay together, got periods {sorted(dts)} s")
    return _scene(sc, tracks, dts.pop() if dts else 1.0 / sc.run.rate, None, highlight_run, where=str(p))


def _pick_scenario(where: Path, wanted: str | None, folders: list[Path], titles: set[str]) -> Scenario:
    if wanted and Path(wanted).is_file():
        return load_scenario(wanted)
    found = {f: load_scenario(f) for f in _scenario_files(folders)}
    if not found:
        raise ScenarioError(
            f"{where}: a replay needs the scenario .toml beside its traces (or in scenarios/), got none; "
            "name one with --scenario FILE"
        )
    if wanted:
        hits = [sc for f, sc in found.items() if wanted in (f.stem, f.name, sc.title)]
        if not hits:
            names = [f.stem for f in found]
            raise ScenarioError(f"{where}: --scenario must be one of {names}, got {wanted!r}{did_you_mean(wanted, names)}")
        return hits[0]
    if len(found) == 1:
        return next(iter(found.values()))
    matching = [sc for sc in found.values() if sc.title in titles]
    if len(matching) == 1 and len(titles) == 1:
        return matching[0]
    names = [f.stem for f in found]
    raise ScenarioError(f"{where}: holds runs of {len(found)} scenarios; choose one with --scenario NAME (one of {names})")


# ---------------------------------------------------------------------- live runs


class LiveRun:
    """Runs a simulation for the viewer; its recorder's arrays are the scene's tracks.

    Parameters
    ----------
    make : callable () -> simulation — builds a fresh run (called again on restart). The
        simulation offers ``step() -> bool``, ``k``, ``plan``, ``runs``, ``status``,
        ``active``, ``end_tick`` and ``recorder`` (a :class:`sim.trace.TraceRecorder`).
    """

    def __init__(self, make: Callable[[], object]) -> None:
        self.make = make
        self.sim: object = None
        self.finished = False

    def start(self) -> list[Track]:
        """(Re)start the run; returns its tracks (views that fill as it runs)."""
        self.sim = sim = self.make()
        self.finished = False
        rec = sim.recorder
        return [
            Track(data={name: arr[:, j] for name, arr in rec.data.items()}, t=rec.t, run=int(rec.runs[j]),
                  label="live", ticks=lambda rec=rec: rec.k)
            for j in range(len(rec.columns))
        ]

    def advance(self, tracks: list[Track], ticks: int, *, budget: float = 0.012) -> None:
        """Step until ``ticks`` ticks are recorded, the run ends or ``budget`` seconds pass."""
        sim = self.sim
        stop = time.perf_counter() + budget
        while not self.finished and sim.recorder.k < ticks:
            self.finished = not sim.step()
            if time.perf_counter() > stop:
                break
        for j, tr in enumerate(tracks):
            col = int(sim.recorder.columns[j])
            if tr.end is None and not sim.active[col]:
                tr.end = int(sim.end_tick[col])
                tr.status = str(sim.status[col])


def live_scene(scenario: Scenario, *, run: int = 0, make: Callable[[], object] | None = None) -> Scene:
    """A scene that runs ``scenario`` (run index ``run``) as it is shown."""
    if make is None:
        from sim.runner import Simulation

        def make() -> object:
            return Simulation(scenario, runs=[run], keep=[run])

    live = LiveRun(make)
    tracks = live.start()
    live.advance(tracks, 1)
    xy, speed = path_from_plan(live.sim.plan)
    return Scene(scenario=scenario, tracks=tracks, dt=float(live.sim.dt), path=xy, path_speed=speed,
                 title=scenario.title, live=live)
