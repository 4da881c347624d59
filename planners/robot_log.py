"""A robot's log: the CSV format, its reader and its checks (robot-side, no simulator).

One row per control tick or sensor sample, one header row of ``name [unit]`` cells, ``#``
lines before the header for metadata (``# key = value``) or comments::

    # counts_per_rev = 2048
    t [s], duty_left [1], duty_right [1], battery [V], position_left [counts], position_right [counts], yaw_rate [rad/s]
    0.000, 0.10, 0.10, 12.41, 0, 0, 0.0003
    0.005, 0.10, 0.10, 12.40, 3, 3,

Columns (``<w>`` is a wheel or side label: ``left`` / ``right`` for a differential or skid
chassis logged per side, ``fl fr rl rr`` for a mecanum chassis; see :data:`WHEEL_LABELS`):

============================ ============================ ==========================================
column                       units allowed                meaning
============================ ============================ ==========================================
``t``                        s, ms                        time since the log began, increasing
``voltage_<w>``              V                            voltage applied to the motor(s)
``duty_<w>``                 1, %                         duty in [-1, 1]; needs ``battery``
``battery``                  V                            battery terminal voltage
``position_<w>``             rad, rev, deg, counts, m     cumulative wheel (shaft) position
``velocity_<w>``             rad/s, rpm, m/s              wheel speed
``yaw``                      rad, deg                     IMU heading (unwrapped or wrapped)
``yaw_rate``                 rad/s, deg/s                 IMU yaw rate
``pod_<i>``                  m, counts                    cumulative tracking-wheel travel, i = 0, 1...
``ref_x ref_y ref_heading``  m / rad, deg                 the reference the robot was driving to
``true_x true_y true_heading`` m / rad, deg               ground truth (simulated logs, motion capture)
``fix_x fix_y fix_heading``  m / rad, deg                 absolute pose fixes (empty when none)
============================ ============================ ==========================================

``counts`` needs the metadata ``counts_per_rev`` (wheels) or ``pod_counts_per_m`` (pods);
``m`` for a wheel needs ``wheel_radius`` [m] to convert to shaft angle. Cells may be empty
(read as NaN) in every column except ``t``: sensors sample at their own rates. A row whose
time goes backwards, or a jump in time longer than ``max_gap`` (default 0.5 s), is an error,
as is text in a number cell; every error names the file, row and column. Rows closer than
0.2 ms apart (median) or all further apart than ``max_gap`` are refused as a wrong time unit
(seconds labelled ``[ms]`` or the reverse). A log may give wheel speeds (``velocity_<w>``)
instead of positions: :meth:`RobotLog.wheel_angle` integrates them for dead reckoning.
"""

from __future__ import annotations

import csv
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from planners.errors import LogError, did_you_mean, format_value

#: wheel labels by how the chassis is logged
WHEEL_LABELS: dict[str, tuple[str, ...]] = {
    "sides": ("left", "right"),
    "mecanum": ("fl", "fr", "rl", "rr"),
}

#: quantity -> {unit: factor to SI}; None marks units converted with metadata
_UNITS: dict[str, dict[str, float | None]] = {
    "time": {"s": 1.0, "ms": 1e-3},
    "voltage": {"V": 1.0},
    "duty": {"1": 1.0, "%": 0.01},
    "angle": {"rad": 1.0, "deg": math.pi / 180.0},
    "wheel_position": {"rad": 1.0, "rev": 2.0 * math.pi, "deg": math.pi / 180.0, "counts": None, "m": None},
    "wheel_speed": {"rad/s": 1.0, "rpm": 2.0 * math.pi / 60.0, "m/s": None},
    "rate": {"rad/s": 1.0, "deg/s": math.pi / 180.0},
    "length": {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "in": 0.0254},
    "pod": {"m": 1.0, "mm": 1e-3, "counts": None},
}

#: exact column name -> quantity
_SINGLE = {
    "t": "time", "battery": "voltage", "yaw": "angle", "yaw_rate": "rate",
    "ref_x": "length", "ref_y": "length", "ref_heading": "angle",
    "true_x": "length", "true_y": "length", "true_heading": "angle",
    "fix_x": "length", "fix_y": "length", "fix_heading": "angle",
}
#: column prefix (before ``_<w>``) -> quantity
_PER_WHEEL = {"voltage": "voltage", "duty": "duty", "position": "wheel_position", "velocity": "wheel_speed"}

_HEADER_CELL = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*\[\s*([^\]]*?)\s*\]\s*$")

DEFAULT_MAX_GAP = 0.5


@dataclass(eq=False)
class RobotLog:
    """A log read from CSV, converted to SI units (wheel positions as shaft angle [rad]).

    Attributes
    ----------
    source : str — the file it was read from
    t : ndarray, shape (T,) — time [s], increasing
    wheels : tuple of str — labels of the wheel columns, in :data:`WHEEL_LABELS` order
    columns : dict of str -> ndarray, shape (T,) — every column in SI units, keyed by name
        (``position_left`` [rad], ``velocity_fl`` [rad/s], ``yaw`` [rad], ``pod_0`` [m], ...)
    meta : dict of str -> str — the ``# key = value`` lines
    rows : ndarray of int, shape (T,) — file line number of each sample (for messages)
    header_row : int or None — file line number of the header (for missing-column messages)
    """

    source: str
    t: np.ndarray
    wheels: tuple[str, ...]
    columns: dict[str, np.ndarray]
    meta: dict[str, str] = field(default_factory=dict)
    rows: np.ndarray | None = None
    header_row: int | None = None

    def _where(self) -> str:
        return f"{self.source}: line {self.header_row} (header)" if self.header_row else self.source

    def has(self, name: str) -> bool:
        """Whether column ``name`` is in the log."""
        return name in self.columns

    def column(self, name: str) -> np.ndarray:
        """Column ``name`` (SI units), shape (T,); a one-line error when it is missing."""
        if name not in self.columns:
            raise LogError(
                f"{self._where()}: needs column {name!r}, has {', '.join(sorted(self.columns))}"
                f"{did_you_mean(name, self.columns)}"
            )
        return self.columns[name]

    def wheel_voltage(self) -> np.ndarray:
        """Applied voltage per wheel label, shape (T, W) [V]: ``voltage_<w>``, or duty x battery."""
        out = []
        for w in self.wheels:
            if self.has(f"voltage_{w}"):
                out.append(self.columns[f"voltage_{w}"])
            elif self.has(f"duty_{w}") and self.has("battery"):
                out.append(self.columns[f"duty_{w}"] * self.columns["battery"])
            else:
                raise LogError(
                    f"{self._where()}: wheel {w!r} needs column 'voltage_{w} [V]', or 'duty_{w} [1]' "
                    "together with 'battery [V]'"
                )
        return np.stack(out, axis=1)

    def wheel_position(self) -> np.ndarray:
        """Wheel shaft angle per wheel label, shape (T, W) [rad]."""
        return np.stack([self.column(f"position_{w}") for w in self.wheels], axis=1)

    def wheel_velocity(self) -> np.ndarray | None:
        """Logged wheel shaft speed per wheel label, shape (T, W) [rad/s], or None when any
        wheel lacks a ``velocity_<w>`` column."""
        if not self.wheels or not all(self.has(f"velocity_{w}") for w in self.wheels):
            return None
        return np.stack([self.columns[f"velocity_{w}"] for w in self.wheels], axis=1)

    def wheel_angle(self) -> np.ndarray | None:
        """Wheel shaft angle per wheel label, shape (T, W) [rad], from ``position_<w>`` when every
        wheel has one, else integrated from ``velocity_<w>``; None when the log has neither.

        Speeds are integrated by the trapezoid rule from 0 at the first row (the angle is then
        relative to the start, which is all dead reckoning uses); empty cells are interpolated
        linearly between the samples around them (held at either end).
        """
        if self.wheels and all(self.has(f"position_{w}") for w in self.wheels):
            return self.wheel_position()
        speed = self.wheel_velocity()
        if speed is None:
            return None
        filled = np.empty_like(speed)
        for j in range(speed.shape[1]):
            ok = np.isfinite(speed[:, j])
            if not ok.any():
                raise LogError(f"{self.source}: column 'velocity_{self.wheels[j]}' has no numbers")
            filled[:, j] = np.interp(self.t, self.t[ok], speed[ok, j])
        # phi_k = sum over i < k of (v_i + v_{i+1}) / 2 (t_{i+1} - t_i)
        steps = 0.5 * (filled[1:] + filled[:-1]) * np.diff(self.t)[:, None]
        return np.vstack([np.zeros((1, filled.shape[1])), np.cumsum(steps, axis=0)])

    def pods(self) -> np.ndarray:
        """Tracking-wheel travel, shape (T, P) [m], pods in index order."""
        names = sorted((c for c in self.columns if c.startswith("pod_")), key=lambda c: int(c[4:]))
        if not names:
            raise LogError(f"{self.source}: needs pod columns 'pod_0 [m]', 'pod_1 [m]', ...")
        return np.stack([self.columns[c] for c in names], axis=1)

    def pose(self, prefix: str) -> np.ndarray | None:
        """``ref``, ``true`` or ``fix`` pose, shape (T, 3) [m, m, rad], or None when not logged."""
        names = [f"{prefix}_x", f"{prefix}_y", f"{prefix}_heading"]
        if not all(self.has(n) for n in names):
            return None
        return np.stack([self.columns[n] for n in names], axis=1)


def _quantity(name: str) -> tuple[str, str | None]:
    """(quantity, wheel label or None) of a column name; a LogError-free lookup (None when unknown)."""
    if name in _SINGLE:
        return _SINGLE[name], None
    if re.fullmatch(r"pod_\d+", name):
        return "pod", None
    prefix, _, label = name.partition("_")
    if prefix in _PER_WHEEL and label:
        return _PER_WHEEL[prefix], label
    return "", None


def _known_names() -> list[str]:
    labels = [w for ws in WHEEL_LABELS.values() for w in ws]
    return [*_SINGLE, "pod_0", *(f"{p}_{w}" for p in _PER_WHEEL for w in labels)]


def _parse_header(source: str, line_no: int, cells: list[str]) -> list[tuple[str, str, str | None, str]]:
    """Header cells -> (name, quantity, wheel label, unit)."""
    out = []
    seen: set[str] = set()
    for cell in cells:
        m = _HEADER_CELL.match(cell)
        if not m:
            raise LogError(
                f"{source}: line {line_no}: header cell {cell.strip()!r} must be 'name [unit]', "
                "e.g. 't [s]' or 'position_left [rad]'"
            )
        name, unit = m.group(1), m.group(2)
        quantity, label = _quantity(name)
        if not quantity:
            raise LogError(f"{source}: line {line_no}: unknown column {name!r}{did_you_mean(name, _known_names())}")
        if label is not None and label not in {w for ws in WHEEL_LABELS.values() for w in ws}:
            raise LogError(
                f"{source}: line {line_no}: column {name!r}: wheel label must be one of "
                f"left, right (per side) or fl, fr, rl, rr (mecanum), got {label!r}"
            )
        allowed = _UNITS[quantity]
        if unit not in allowed:
            raise LogError(
                f"{source}: line {line_no}: column {name!r} unit must be one of "
                f"{', '.join(allowed)}, got {unit!r}"
            )
        if name in seen:
            raise LogError(f"{source}: line {line_no}: column {name!r} appears twice")
        seen.add(name)
        out.append((name, quantity, label, unit))
    return out


def _wheel_labels(source: str, labels: set[str]) -> tuple[str, ...]:
    for ws in WHEEL_LABELS.values():
        if labels and labels <= set(ws):
            missing = [w for w in ws if w not in labels]
            if missing:
                raise LogError(f"{source}: wheel columns for {', '.join(missing)} are missing (have {', '.join(sorted(labels))})")
            return ws
    if labels:
        raise LogError(
            f"{source}: wheel labels must be all per side (left, right) or all mecanum "
            f"(fl, fr, rl, rr), got {', '.join(sorted(labels))}"
        )
    return ()


def _scale(source: str, name: str, quantity: str, unit: str, meta: dict[str, str]) -> float:
    factor = _UNITS[quantity][unit]
    if factor is not None:
        return factor

    def number(key: str) -> float:
        if key not in meta:
            raise LogError(f"{source}: column {name!r} in [{unit}] needs the metadata line '# {key} = ...'")
        try:
            value = float(meta[key])
        except ValueError:
            raise LogError(f"{source}: metadata {key} must be a positive number, got {format_value(meta[key])}") from None
        if not value > 0.0:
            raise LogError(f"{source}: metadata {key} must be a positive number, got {format_value(meta[key])}")
        return value

    if quantity == "pod":
        return 1.0 / number("pod_counts_per_m")
    if unit == "counts":
        return 2.0 * math.pi / number("counts_per_rev")
    return 1.0 / number("wheel_radius")  # m or m/s at the wheel rim -> shaft angle


#: shortest median time between rows a robot log may have [s] (faster than 5 kHz is taken for a
#: unit mistake; common practice, no source)
MIN_MEDIAN_STEP = 2e-4


def _check_spacing(source: str, header_row: int | None, unit: str, step: np.ndarray, max_gap: float) -> None:
    """Refuse row spacings no robot log has (median under :data:`MIN_MEDIAN_STEP`, or every step
    a gap): the time column's unit is probably wrong."""
    where = f"{source}: line {header_row} (header), column 't [{unit}]'"
    median = float(np.median(step))
    if median < MIN_MEDIAN_STEP:
        hint = "; if the times are in seconds, label the column 't [s]'" if unit == "ms" else ""
        raise LogError(
            f"{where}: rows are {median:.3g} s apart (median), {1.0 / median:.3g} Hz; a robot log must be "
            f"sampled between {1.0 / max_gap:g} Hz and {1.0 / MIN_MEDIAN_STEP:g} Hz{hint}"
        )
    if float(np.min(step)) > max_gap:
        hint = "; if the times are in milliseconds, label the column 't [ms]'" if unit == "s" else ""
        raise LogError(
            f"{where}: rows are at least {float(np.min(step)):.3g} s apart; a robot log must be sampled between "
            f"{1.0 / max_gap:g} Hz and {1.0 / MIN_MEDIAN_STEP:g} Hz{hint}"
        )


def read_log(path: str | os.PathLike, *, max_gap: float = DEFAULT_MAX_GAP) -> RobotLog:
    """Read and check a robot log CSV.

    Parameters
    ----------
    path : str or PathLike
    max_gap : float — longest allowed time between rows [s]

    Returns
    -------
    RobotLog

    Raises
    ------
    LogError — unreadable file, bad header or unit, text in a number cell, a row of the wrong
        length, time not increasing, a median row spacing under :data:`MIN_MEDIAN_STEP` or over
        ``max_gap`` (the time column's unit is wrong), a gap longer than ``max_gap``, or fewer
        than two rows
    """
    source = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise LogError(f"{source}: cannot read log ({exc.strerror})") from None
    meta: dict[str, str] = {}
    header = None
    header_row = None
    data: list[list[str]] = []
    rows: list[int] = []
    for line_no, cells in enumerate(csv.reader(text.splitlines()), start=1):
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        if header is None and cells[0].lstrip().startswith("#"):
            key, sep, value = ",".join(cells).lstrip()[1:].partition("=")
            if sep:
                meta[key.strip()] = value.strip()
            continue
        if header is None:
            header = _parse_header(source, line_no, cells)
            header_row = line_no
            continue
        if len(cells) != len(header):
            raise LogError(f"{source}: row {line_no} has {len(cells)} cells, the header has {len(header)}")
        data.append(cells)
        rows.append(line_no)
    if header is None:
        raise LogError(f"{source}: no header row ('t [s], ...') found")
    names = [h[0] for h in header]
    if "t" not in names:
        raise LogError(f"{source}: needs a time column 't [s]'{did_you_mean('t', names)}")
    if len(data) < 2:
        raise LogError(f"{source}: needs at least two data rows, got {len(data)}")
    columns: dict[str, np.ndarray] = {}
    for j, (name, quantity, _, unit) in enumerate(header):
        scale = _scale(source, name, quantity, unit, meta)
        values = np.empty(len(data))
        for i, cells in enumerate(data):
            cell = cells[j].strip()
            if not cell:
                if name == "t":
                    raise LogError(f"{source}: row {rows[i]}, column 't': time must not be empty")
                values[i] = np.nan
                continue
            try:
                values[i] = float(cell)
            except ValueError:
                raise LogError(
                    f"{source}: row {rows[i]}, column {name!r}: must be a number, got {cell!r}"
                ) from None
        columns[name] = values * scale
    t = columns.pop("t")
    step = np.diff(t)
    bad = np.flatnonzero(~(step > 0.0))
    if bad.size:
        i = int(bad[0]) + 1
        raise LogError(
            f"{source}: row {rows[i]}: time must increase, got t = {t[i]:g} s after {t[i - 1]:g} s"
        )
    _check_spacing(source, header_row, header[names.index("t")][3], step, max_gap)
    gap = np.flatnonzero(step > max_gap)
    if gap.size:
        i = int(gap[0]) + 1
        raise LogError(
            f"{source}: row {rows[i]}: gap of {step[i - 1]:g} s in time (from {t[i - 1]:g} s to "
            f"{t[i]:g} s); gaps longer than {max_gap:g} s are not allowed"
        )
    labels = {h[2] for h in header if h[2] is not None}
    return RobotLog(
        source=source, t=t, wheels=_wheel_labels(source, labels), columns=columns, meta=meta,
        rows=np.asarray(rows, dtype=np.int64), header_row=header_row,
    )
