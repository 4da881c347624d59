"""A run's recorded time series: record, save and load (.npz, no pickle), CSV export.

Arrays are time-major with the robot axis second: ``pose`` is ``(T, N, 3)``. Only the robots
asked for are recorded, so a big batch keeps memory bounded.
"""

from __future__ import annotations

import csv
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from planners.errors import ScenarioError

#: channel -> (per-robot trailing shape as a function of wheel count W, meaning)
CHANNELS: dict[str, tuple[str, str]] = {
    "pose": ("3", "true pose x, y, heading [m, m, rad], field frame"),
    "velocity": ("3", "true body velocity vx, vy, omega [m/s, m/s, rad/s]"),
    "estimate": ("3", "estimated pose [m, m, rad], field frame"),
    "covariance": ("3x3", "estimate covariance (NaN when the estimator has none)"),
    "reference": ("3", "plan reference pose at this tick [m, m, rad]"),
    "command": ("3", "tracker body velocity command [m/s, m/s, rad/s]"),
    "target": ("2", "tracker target / lookahead point [m] (NaN when none)"),
    "duty": ("W", "wheel duty [-1, 1]"),
    "wheel_speed": ("W", "true wheel speed [rad/s]"),
    "wheel_target": ("W", "wheel speed target [rad/s]"),
    "current": ("W", "motor current [A]"),
    "slip": ("W", "wheel slip speed [m/s]"),
    "battery": ("", "battery terminal voltage [V]"),
    "cross_track": ("", "signed cross-track error of the true pose [m]"),
    "fix": ("3", "absolute fix received this tick (NaN when none) [m, m, rad]"),
}


def _shape(code: str, wheels: int) -> tuple[int, ...]:
    return {"3": (3,), "2": (2,), "3x3": (3, 3), "W": (wheels,), "": ()}[code]


@dataclass(eq=False)
class Trace:
    """Recorded time series of some robots of a run.

    Attributes
    ----------
    t : ndarray, shape (T,) — time [s], exactly k * dt
    data : dict of str -> ndarray, shape (T, R, ...) — channels of :data:`CHANNELS`
    runs : ndarray, shape (R,) — run index k of each recorded robot
    meta : dict — scenario title, seed, dt, wheel count, per-robot end tick
    """

    t: np.ndarray
    data: dict[str, np.ndarray]
    runs: np.ndarray
    meta: dict = field(default_factory=dict)

    def __getitem__(self, channel: str) -> np.ndarray:
        return self.data[channel]

    @property
    def ticks(self) -> int:
        """Number of recorded ticks T."""
        return len(self.t)

    def robot(self, k: int) -> int:
        """Column of run ``k`` in the arrays."""
        hits = np.flatnonzero(self.runs == k)
        if hits.size == 0:
            raise KeyError(f"run {k} is not in this trace (runs: {self.runs.tolist()})")
        return int(hits[0])

    def end_tick(self, column: int) -> int:
        """Last tick of a recorded robot's own run (it may finish before the batch does)."""
        ends = self.meta.get("end_tick")
        return int(ends[column]) if ends is not None else self.ticks - 1

    def save(self, path: str | os.PathLike) -> None:
        """Write ``.npz`` (compressed, no pickled objects; meta as a JSON string)."""
        arrays = {f"data_{k}": v for k, v in self.data.items()}
        np.savez_compressed(
            path, t=self.t, runs=self.runs, meta=np.array(json.dumps(self.meta)), **arrays
        )

    @classmethod
    def load(cls, path: str | os.PathLike) -> Trace:
        """Read a trace written by :meth:`save` (``allow_pickle=False``)."""
        try:
            with np.load(path, allow_pickle=False) as z:
                data = {k[5:]: z[k] for k in z.files if k.startswith("data_")}
                return cls(t=z["t"], data=data, runs=z["runs"], meta=json.loads(str(z["meta"])))
        except (OSError, ValueError, KeyError) as exc:
            raise ScenarioError(f"{path}: not a skidpad trace ({exc})") from None

    def to_csv(self, path: str | os.PathLike, *, column: int = 0) -> None:
        """Write one robot's trace as CSV, one row per tick up to its end.

        Columns: ``t, x, y, heading, vx, vy, omega``, then the estimate, reference and command,
        then per-wheel duty, speed, current and slip, battery and cross-track.
        """
        end = self.end_tick(column) + 1
        head = ["t", "x", "y", "heading", "vx", "vy", "omega"]
        cols = [self.t[:end], *self.data["pose"][:end, column].T, *self.data["velocity"][:end, column].T]
        for name, parts in (("estimate", ("x", "y", "heading")), ("reference", ("x", "y", "heading")),
                            ("command", ("vx", "vy", "omega"))):
            if name in self.data:
                head += [f"{name}_{p}" for p in parts]
                cols += list(self.data[name][:end, column].T)
        for name in ("duty", "wheel_speed", "current", "slip"):
            if name in self.data:
                w = self.data[name].shape[2]
                head += [f"{name}_{i}" for i in range(w)]
                cols += list(self.data[name][:end, column].T)
        for name in ("battery", "cross_track"):
            if name in self.data:
                head.append(name)
                cols.append(self.data[name][:end, column])
        rows = np.column_stack(cols)
        with open(path, "w", newline="") as f:
            w = csv.writer(f)
            w.writerow(head)
            w.writerows(rows.tolist())


class TraceRecorder:
    """Preallocated recorder for selected robots of a World (``columns`` index the batch)."""

    def __init__(self, columns: np.ndarray, runs: np.ndarray, max_ticks: int, wheels: int, meta: dict):
        self.columns = np.asarray(columns, dtype=np.int64)
        self.runs = np.asarray(runs, dtype=np.int64)
        r = len(self.columns)
        self.data = {
            name: np.full((max_ticks, r, *_shape(code, wheels)), np.nan)
            for name, (code, _) in CHANNELS.items()
        }
        self.t = np.zeros(max_ticks)
        self.meta = meta
        self.k = 0

    def record(self, k: int, t: float, **channels: np.ndarray | None) -> None:
        """Store tick ``k``; each channel is the whole batch's array (N, ...) or None."""
        if self.columns.size == 0:
            return
        self.t[k] = t
        for name, value in channels.items():
            if value is not None:
                self.data[name][k] = value[self.columns]
        self.k = max(self.k, k + 1)

    def finish(self, end_tick: np.ndarray) -> Trace:
        """The trace up to the last recorded tick; ``end_tick`` (N,) per robot of the batch."""
        meta = dict(self.meta)
        meta["end_tick"] = [int(end_tick[c]) for c in self.columns]
        return Trace(
            t=self.t[: self.k].copy(),
            data={k: v[: self.k].copy() for k, v in self.data.items()},
            runs=self.runs.copy(),
            meta=meta,
        )


def write_csv_rows(path: Path, header: list[str], rows: list[list]) -> None:
    """Write a small CSV table (header + rows)."""
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(header)
        w.writerows(rows)
