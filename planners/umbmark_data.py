"""UMBmark inputs: end errors of the square test, from a results file or from robot logs.

The results file ``umbmark.csv`` is what a user writes after driving the squares (with a
tape measure) or what the simulator writes (:mod:`sim.umbmark`)::

    # side = 4            square side L [m]
    # track = 0.388       track the odometry used during the runs [m]
    # wheel_radius = 0.05 (optional) radius the odometry used [m]
    # radius_scale = 1.0025, 0.9975   (optional) left, right radius / wheel_radius
    # track_scale = 0.970874          (optional) the scenario key that gave ``track``
    direction, run, err_x [m], err_y [m]
    cw, 0, -0.639, -0.903
    ccw, 0, 0.028, -0.023

``err_x``, ``err_y``: true end position minus where the odometry believes it is (the
start), in the start frame (x along the start heading, y to its left); units m, cm, mm or
in. A sibling ``umbmark-corrected.csv`` of the same form holds the runs repeated with the
corrected values.

From robot logs (:mod:`planners.robot_log`) each log is one run: per-side wheel positions
and the true pose (``true_*`` from the simulator or motion capture), or the metadata
``measured_end = x, y`` (true end in the start frame [m]). The odometry end pose is
recomputed from the encoders with :class:`planners.odometry.Odometry`, the direction is
the sign of its total turn (three quarter turns,
or four with the final turn back to the start heading), and the side is the extent of its path.
"""

from __future__ import annotations

import csv
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from planners.errors import LogError
from planners.identify_geometry import radius_scale, side_radii
from planners.odometry import Odometry
from planners.odometry_geometry import side_forward_matrix
from planners.readings import Readings
from planners.robot_log import RobotLog, read_log

RESULTS = "umbmark.csv"
CORRECTED = "umbmark-corrected.csv"
_LENGTH = {"m": 1.0, "cm": 0.01, "mm": 0.001, "in": 0.0254}
_COLUMNS = ("direction", "run", "err_x", "err_y")


@dataclass
class UmbmarkData:
    """End errors of the bidirectional square test and what the odometry assumed.

    Attributes
    ----------
    source : str
    cw, ccw : ndarray, shape (n, 2) — end errors x, y [m], start frame
    side : float — square side [m]
    track : float — track the odometry used [m]
    wheel_radius : tuple of 2 float or None — left, right radii the odometry used [m]
    meta : dict — the file's metadata lines (or the first log's)
    logs : list of RobotLog — the logs the errors came from (empty for a results file)
    """

    source: str
    cw: np.ndarray
    ccw: np.ndarray
    side: float
    track: float
    wheel_radius: tuple[float, float] | None = None
    meta: dict[str, str] = field(default_factory=dict)
    logs: list[RobotLog] = field(default_factory=list)


def _number(source: str, meta: dict[str, str], key: str, *, required: bool) -> float | None:
    if key not in meta:
        if required:
            raise LogError(f"{source}: needs the metadata line '# {key} = <m>'")
        return None
    try:
        value = float(meta[key])
    except ValueError:
        value = float("nan")
    if not value > 0.0:
        raise LogError(f"{source}: metadata {key} must be a positive number, got {meta[key]!r}")
    return value


def read_results(path: str | os.PathLike) -> UmbmarkData:
    """Read an ``umbmark.csv`` results file (see the module notes).

    Raises
    ------
    LogError — unreadable file, missing metadata or column, a bad unit, direction or number,
        or a direction with no runs
    """
    source = str(path)
    try:
        lines = Path(path).read_text(encoding="utf-8-sig").splitlines()
    except OSError as exc:
        raise LogError(f"{source}: cannot read UMBmark results ({exc.strerror})") from None
    meta: dict[str, str] = {}
    header: list[tuple[str, float]] | None = None
    rows: dict[str, list[tuple[float, float]]] = {"cw": [], "ccw": []}
    for line_no, cells in enumerate(csv.reader(lines), start=1):
        if not cells or not "".join(cells).strip():
            continue
        if header is None and cells[0].lstrip().startswith("#"):
            key, sep, value = ",".join(cells).lstrip()[1:].partition("=")
            if sep:
                meta[key.strip()] = value.split("#")[0].strip()
            continue
        if header is None:
            header = []
            for cell in cells:
                name, _, unit = cell.strip().partition("[")
                name, unit = name.strip(), unit.rstrip("] ").strip()
                if name in ("err_x", "err_y") and unit not in _LENGTH:
                    raise LogError(f"{source}: line {line_no}: column {name!r} unit must be one of "
                                   f"{', '.join(_LENGTH)}, got {unit!r}")
                header.append((name, _LENGTH.get(unit, 1.0)))
            names = [h[0] for h in header]
            missing = [c for c in _COLUMNS if c not in names]
            if missing:
                raise LogError(f"{source}: line {line_no}: needs columns {', '.join(_COLUMNS)}, "
                               f"missing {', '.join(missing)}")
            continue
        if len(cells) != len(header):
            raise LogError(f"{source}: row {line_no} has {len(cells)} cells, the header has {len(header)}")
        rec = {name: (cell.strip(), scale) for (name, scale), cell in zip(header, cells)}
        direction = rec["direction"][0].lower()
        if direction not in rows:
            raise LogError(f"{source}: row {line_no}, column 'direction': must be 'cw' or 'ccw', "
                           f"got {rec['direction'][0]!r}")
        err = []
        for col in ("err_x", "err_y"):
            text, scale = rec[col]
            try:
                err.append(float(text) * scale)
            except ValueError:
                raise LogError(f"{source}: row {line_no}, column {col!r}: must be a number, got {text!r}") from None
        rows[direction].append((err[0], err[1]))
    if header is None:
        raise LogError(f"{source}: no header row ('direction, run, err_x [m], err_y [m]') found")
    for d, errs in rows.items():
        if not errs:
            raise LogError(f"{source}: needs at least one {d} run, got none")
    r = _number(source, meta, "wheel_radius", required=False)
    scale = radius_scale(source, meta)
    _number(source, meta, "track_scale", required=False)  # checked here, used by the caller
    return UmbmarkData(
        source=source, cw=np.array(rows["cw"]), ccw=np.array(rows["ccw"]),
        side=_number(source, meta, "side", required=True), track=_number(source, meta, "track", required=True),
        wheel_radius=None if r is None else (r * scale[0], r * scale[1]), meta=meta,
    )


def write_results(path: str | os.PathLike, cw: np.ndarray, ccw: np.ndarray, *, meta: dict[str, object]) -> Path:
    """Write end errors (n, 2) [m] of both directions as an ``umbmark.csv`` results file."""
    path = Path(path)
    with path.open("w", newline="") as fh:
        fh.write("# UMBmark square test: end error = true end minus odometry end, start frame\n")
        for key, value in meta.items():
            fh.write(f"# {key} = {value}\n")
        w = csv.writer(fh)
        w.writerow(["direction", "run", "err_x [m]", "err_y [m]"])
        for name, errs in (("cw", cw), ("ccw", ccw)):
            for k, (ex, ey) in enumerate(np.asarray(errs, dtype=float).reshape(-1, 2)):
                w.writerow([name, k, f"{ex:.6f}", f"{ey:.6f}"])
    return path


def odometry_path(log: RobotLog, radii: tuple[float, float], track: float) -> np.ndarray:
    """Encoder odometry of a per-side log from the origin, shape (T, 3) [m, m, rad], start frame."""
    phi = log.wheel_position()
    ok = np.all(np.isfinite(phi), axis=1)
    odo = Odometry(source="encoders", forward=side_forward_matrix(radii[0], radii[1], track),
                   counts_per_rev=2.0 * np.pi)
    odo.reset(np.zeros((1, 3)))
    out = np.array([odo.update(Readings(t=float(t), encoder_counts=q[None, :]))[0]
                    for t, q in zip(log.t[ok], phi[ok])])
    out[:, 2] = np.unwrap(out[:, 2])  # small turns per row: the total turn is kept
    return out


def end_error(log: RobotLog, odo_end: np.ndarray) -> np.ndarray:
    """True end minus odometry end (2,) [m], start frame, from ``true_*`` or ``measured_end``."""
    true = log.pose("true")
    if true is not None:
        ok = np.all(np.isfinite(true), axis=1)
        start, end = true[ok][0], true[ok][-1]
        c, s = np.cos(start[2]), np.sin(start[2])
        d = end[:2] - start[:2]
        measured = np.array([c * d[0] + s * d[1], -s * d[0] + c * d[1]])
    elif "measured_end" in log.meta:
        try:
            measured = np.array([float(v) for v in log.meta["measured_end"].split(",")])
        except ValueError:
            measured = np.zeros(0)
        if measured.shape != (2,):
            raise LogError(f"{log.source}: metadata measured_end must be 'x, y' in metres, got "
                           f"{log.meta['measured_end']!r}")
    else:
        raise LogError(f"{log.source}: needs the true end: columns true_x, true_y, true_heading, or "
                       "the metadata line '# measured_end = x, y' (start frame, m)")
    return measured - odo_end[:2]


def _geometry(log: RobotLog) -> tuple[tuple[float, float], float]:
    """Left, right radii and track [m] the log's odometry used (its metadata)."""
    if log.wheels != ("left", "right"):
        raise LogError(f"{log.source}: UMBmark needs per-side wheel columns 'position_left', "
                       f"'position_right', got wheels {', '.join(log.wheels) or 'none'}")
    track = _number(log.source, log.meta, "track", required=True)
    if "track_scale" in log.meta:
        track *= _number(log.source, log.meta, "track_scale", required=True)
    return side_radii(log), track


def log_errors(
    logs: list[RobotLog], *, scale: tuple[float, float, float] = (1.0, 1.0, 1.0)
) -> tuple[np.ndarray, np.ndarray, float]:
    """End errors of runs from their logs, odometry recomputed from the encoders.

    Parameters
    ----------
    logs : list of RobotLog — one run each, both directions
    scale : (left, right, track) — multiply the geometry each log's odometry used (to try a
        correction on the same runs)

    Returns
    -------
    cw, ccw : ndarray, shape (n, 2) — end errors [m], start frame
    side : float — mean extent of the odometry paths [m]
    """
    rows: dict[str, list[np.ndarray]] = {"cw": [], "ccw": []}
    sides = []
    for log in logs:
        (rl, rr), track = _geometry(log)
        path_xy = odometry_path(log, (rl * scale[0], rr * scale[1]), track * scale[2])
        turn = float(path_xy[-1, 2])
        if not 1.25 * np.pi <= abs(turn) <= 2.25 * np.pi:
            raise LogError(f"{log.source}: a UMBmark run must turn three or four quarter turns one "
                           f"way by odometry (270 or 360 deg), got {np.degrees(turn):.0f} deg")
        rows["ccw" if turn > 0 else "cw"].append(end_error(log, path_xy[-1]))
        sides.append(0.5 * (np.ptp(path_xy[:, 0]) + np.ptp(path_xy[:, 1])))
    return np.array(rows["cw"]).reshape(-1, 2), np.array(rows["ccw"]).reshape(-1, 2), float(np.mean(sides))


def from_logs(paths: list[str | os.PathLike]) -> UmbmarkData:
    """UMBmark end errors from one log per run (see the module notes).

    Raises
    ------
    LogError — unreadable logs, a log without per-side positions, geometry metadata or true
        end, a run that did not turn about one revolution, or a direction with no runs
    """
    logs = [read_log(p) for p in paths]
    cw, ccw, side = log_errors(logs)
    source = ", ".join(str(p) for p in paths)
    for d, errs in (("cw", cw), ("ccw", ccw)):
        if not len(errs):
            raise LogError(f"{source}: UMBmark needs at least one {d} run, got none")
    radii, track = _geometry(logs[0])
    return UmbmarkData(source=source, cw=cw, ccw=ccw, side=side, track=track, wheel_radius=radii,
                       meta=dict(logs[0].meta), logs=logs)


def load(path: str | os.PathLike) -> tuple[UmbmarkData, UmbmarkData | None]:
    """Results file, folder (``umbmark.csv``, else every ``*.csv`` log) or one log file.

    Returns
    -------
    (data, corrected) — ``corrected`` from a sibling ``umbmark-corrected.csv``, or None
    """
    p = Path(path)
    if p.is_dir():
        if (p / RESULTS).is_file():
            corrected = read_results(p / CORRECTED) if (p / CORRECTED).is_file() else None
            return read_results(p / RESULTS), corrected
        logs = sorted(q for q in p.glob("*.csv") if q.name != CORRECTED)
        if not logs:
            raise LogError(f"{p}: folder must hold {RESULTS} or robot logs (*.csv), found neither")
        return from_logs(logs), None
    if not p.is_file():
        raise LogError(f"{p}: no such file or folder")
    with p.open(encoding="utf-8-sig") as fh:
        head = [ln for ln in (fh.readline() for _ in range(200)) if ln.strip() and not ln.lstrip().startswith("#")]
    if head and head[0].split(",")[0].strip().startswith("direction"):
        sibling = p.with_name(CORRECTED)
        return read_results(p), read_results(sibling) if sibling.is_file() and sibling != p else None
    return from_logs([p]), None
