"""Batch results on disk: the append-only ``results.csv`` and the per-group ``summary.csv``.

Only the parent process of a batch writes these files. Each finished work unit's rows go to
``results.csv`` in one ``write`` followed by ``os.fsync``, so a killed batch leaves whole rows
(and at worst one torn last line, which :func:`read_results` ignores and :func:`open_results`
cuts off before appending). ``summary.csv`` is replaced atomically (temp file + ``os.replace``).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

from planners.errors import SkidpadError
from sim.scoring import SCORE_KEYS

LEAD_COLUMNS = ("scenario", "run", "seed")
#: scorecard keys that are not numeric figures
TEXT_KEYS = ("status", "completed", "status_cause", "final_pose_true", "final_pose_estimated")
FIGURES = tuple(k for k in SCORE_KEYS if k not in TEXT_KEYS)
STATS = ("mean", "p50", "p95", "max")


def header(sweep_keys: Sequence[str]) -> list[str]:
    """Columns of results.csv: scenario, run, seed, the sweep keys, then :data:`SCORE_KEYS`."""
    return [*LEAD_COLUMNS, *sweep_keys, *SCORE_KEYS]


def _cell(value: object) -> str:
    if isinstance(value, (list, tuple, np.ndarray)):
        return json.dumps([float(v) for v in value])
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return repr(float(value))  # shortest string that reads back to the same double
    return " ".join(str(value).split())  # one line per row, always


def parse_cell(key: str, text: str) -> object:
    """The value of one results.csv cell (inverse of the writer's formatting)."""
    if key in ("scenario", "status", "status_cause") or text == "":
        return text
    if key in ("run", "seed"):
        return int(text)
    if key == "completed":
        return text == "true"
    if key.startswith("final_pose_"):
        return json.loads(text)
    if key in SCORE_KEYS:
        try:
            return int(text)
        except ValueError:
            return float(text)
    return text  # sweep values stay as the strings given on the command line


def format_rows(rows: Iterable[dict], columns: Sequence[str]) -> str:
    """CSV text of whole rows (``\\n`` line ends) in the given column order."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    for row in rows:
        w.writerow([_cell(row.get(c, "")) for c in columns])
    return buf.getvalue()


def read_results(path: str | os.PathLike) -> tuple[list[str], list[dict]]:
    """Header and whole rows of a results.csv; a torn last line (no line end) is ignored."""
    text = Path(path).read_text() if Path(path).exists() else ""
    if not text.endswith("\n"):
        text = text[: text.rfind("\n") + 1]
    lines = list(csv.reader(io.StringIO(text)))
    if not lines:
        return [], []
    cols = lines[0]
    rows = []
    for cells in lines[1:]:
        if len(cells) != len(cols):
            continue
        rows.append({c: parse_cell(c, v) for c, v in zip(cols, cells)})
    return cols, rows


class ResultsFile:
    """Append-only writer of results.csv (one ``write`` + ``fsync`` per finished unit).

    Parameters
    ----------
    path : path of results.csv
    columns : the header; an existing file must have exactly this header
    """

    def __init__(self, path: str | os.PathLike, columns: Sequence[str]) -> None:
        self.path = Path(path)
        self.columns = list(columns)
        if self.path.exists() and self.path.stat().st_size > 0:
            old, _ = read_results(self.path)
            if old and old != self.columns:
                raise SkidpadError(
                    f"{self.path}: header must be {','.join(self.columns)} to resume, got {','.join(old)}"
                )
            raw = self.path.read_bytes()
            cut = raw.rfind(b"\n") + 1
            if cut < len(raw):  # drop a torn last line before appending
                with open(self.path, "r+b") as f:
                    f.truncate(cut)
            if not old:
                self.path.write_text(format_rows([dict(zip(self.columns, self.columns))], self.columns))
        else:
            self.path.write_text(format_rows([dict(zip(self.columns, self.columns))], self.columns))
        self._f = open(self.path, "a", newline="")

    def append(self, rows: Sequence[dict]) -> None:
        """Append whole rows at once and flush them to disk."""
        self._f.write(format_rows(rows, self.columns))
        self._f.flush()
        os.fsync(self._f.fileno())

    def close(self) -> None:
        self._f.close()


def summarise(rows: Sequence[dict], sweep_keys: Sequence[str]) -> list[dict]:
    """One summary row per (scenario, sweep point): n, completion rate, mean/p50/p95/max of figures."""
    groups: dict[tuple, list[dict]] = {}
    for r in rows:
        groups.setdefault((r["scenario"], *(r.get(k, "") for k in sweep_keys)), []).append(r)
    out = []
    for key, rs in groups.items():
        s: dict = dict(zip(("scenario", *sweep_keys), key))
        s["n"] = len(rs)
        s["failed"] = sum(r["status"] == "failed" for r in rs)
        s["completion_rate"] = sum(r["completed"] is True for r in rs) / len(rs)
        for fig in FIGURES:
            v = np.array([r[fig] for r in rs if isinstance(r.get(fig), (int, float))], dtype=float)
            v = v[np.isfinite(v)]
            for stat in STATS:
                s[f"{fig}_{stat}"] = _stat(v, stat)
        out.append(s)
    return out


def _stat(v: np.ndarray, stat: str) -> float:
    if v.size == 0:
        return math.nan
    if stat == "mean":
        return float(v.mean())
    if stat == "max":
        return float(v.max())
    return float(np.percentile(v, 50 if stat == "p50" else 95))


def write_summary(path: str | os.PathLike, summary: Sequence[dict], sweep_keys: Sequence[str]) -> None:
    """Replace summary.csv atomically (temp file in the same folder + ``os.replace``)."""
    cols = ["scenario", *sweep_keys, "n", "failed", "completion_rate"]
    cols += [f"{f}_{s}" for f in FIGURES for s in STATS]
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "w", newline="") as f:
        f.write(format_rows([dict(zip(cols, cols))], cols))
        f.write(format_rows([{c: ("" if isinstance(s.get(c), float) and math.isnan(s[c]) else s.get(c, ""))
                              for c in cols} for s in summary], cols))
        f.flush()
        os.fsync(f.fileno())
    os.replace(tmp, path)
