"""Write a robot log in the CSV format that :func:`planners.robot_log.read_log` reads."""

from __future__ import annotations

import csv
import os
from pathlib import Path

import numpy as np

from planners.errors import LogError
from planners.robot_log import _UNITS, _quantity


def write_log(
    path: str | os.PathLike,
    t: np.ndarray,
    columns: dict[str, tuple[str, np.ndarray]],
    *,
    meta: dict[str, object] | None = None,
    comment: str = "",
) -> Path:
    """Write a log in the format :func:`read_log` reads.

    Parameters
    ----------
    path : str or PathLike
    t : ndarray, shape (T,) — time [s]
    columns : dict of name -> (unit, ndarray shape (T,)) — NaN is written as an empty cell
    meta : dict, optional — ``# key = value`` lines
    comment : str — ``#`` comment lines written first (one per line of the text)
    """
    path = Path(path)
    names = list(columns)
    for name in names:
        quantity, _ = _quantity(name)
        unit = columns[name][0]
        if not quantity or unit not in _UNITS[quantity]:
            raise LogError(f"{path}: cannot write column {name!r} in [{unit}]")
    with path.open("w", newline="") as fh:
        for line in comment.splitlines():
            fh.write(f"# {line}\n" if line else "#\n")
        for key, value in (meta or {}).items():
            fh.write(f"# {key} = {value}\n")
        w = csv.writer(fh)
        w.writerow(["t [s]", *(f"{n} [{columns[n][0]}]" for n in names)])
        arrays = [np.asarray(columns[n][1], dtype=np.float64) for n in names]
        for i in range(len(t)):
            w.writerow([f"{t[i]:.6f}", *("" if not np.isfinite(a[i]) else f"{a[i]:.9g}" for a in arrays)])
    return path
