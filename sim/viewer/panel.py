"""Screen-space parts of the picture: the status side bar, the timeline, the help overlay.

:func:`status_lines` computes the figures (no drawing, easy to test); the ``draw_*``
functions lay them out with the canvas's screen-space primitives. Lengths are shown in cm
(``units="m"``) or inches (``units="in"``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from sim.units import UNITS
from sim.viewer import palette as pal
from sim.viewer.scene import Scene

if TYPE_CHECKING:  # pragma: no cover
    from sim.viewer.draw import Canvas, Rect

_IN = UNITS["length"]["in"]
#: run endings shown in the warning colour
FAILED = ("timeout", "diverged", "collided")


def length_text(value: float, units: str) -> str:
    """A length [m] for the panel: cm (or m past 1 m) for ``"m"``, inches for ``"in"``."""
    if not math.isfinite(value):
        return "-"
    if units == "in":
        return f"{value / _IN:.2f} in"
    return f"{100 * value:.1f} cm" if abs(value) < 1.0 else f"{value:.2f} m"


def speed_text(value: float, units: str) -> str:
    """A speed [m/s] in m/s or in/s."""
    if not math.isfinite(value):
        return "-"
    return f"{value / _IN:.1f} in/s" if units == "in" else f"{value:.2f} m/s"


def status_lines(scene: Scene, k: int, *, units: str = "m") -> list[tuple[str, str, bool]]:
    """The status figures of the chosen robot at tick ``k``: (label, value, alert) rows.

    Rows: time, speed, cross-track error, estimate error, battery voltage, status. ``alert``
    marks a value to draw in the warning colour (an ended run that did not complete).
    """
    tr = scene.chosen
    j = tr.at(k)
    d = tr.data
    v = d["velocity"][j]
    pose = d["pose"][j]
    est = d["estimate"][j]
    status = tr.status_at(k)
    return [
        ("time", f"{scene.time(j):.2f} s", False),
        ("speed", speed_text(float(np.hypot(v[0], v[1])), units), False),
        ("cross-track", length_text(float(d["cross_track"][j]), units), False),
        ("estimate error", length_text(float(np.hypot(*(est[:2] - pose[:2]))), units), False),
        ("battery", f"{float(d['battery'][j]):.2f} V" if np.isfinite(d["battery"][j]) else "-", False),
        ("status", status, status in FAILED),
    ]


def draw_panel(
    canvas: Canvas, rect: Rect, scene: Scene, k: int, *, units: str, playing: bool, speed: float,
    follow: bool, on: frozenset[str],
) -> None:
    """The side bar: title, status figures, playback state, colour key."""
    left, top, w, h = rect
    canvas.rect(rect, fill=pal.PANEL)
    big = max(16, int(h / 30))
    small = max(14, int(big * 0.75))
    x = left + 16
    y = top + 14
    canvas.text((x, y), "skidpad", pal.TEXT_DIM, size=small)
    y += small + 2
    for line in _wrap(canvas, scene.title or scene.scenario.title, w - 32, big, bold=True)[:3]:
        canvas.text((x, y), line, pal.TEXT, size=big, bold=True)
        y += big
    tr = scene.chosen
    who = f"run {tr.run}" + (f"   ({scene.highlight + 1} of {len(scene.tracks)})" if len(scene.tracks) > 1 else "")
    who += "   live" if scene.live is not None else ""
    canvas.text((x, y + 4), who, pal.TEXT_DIM, size=small)
    y += small + 14
    y = _rule(canvas, left, y, w)
    for label, value, alert in status_lines(scene, k, units=units):
        canvas.text((x, y), label, pal.TEXT_DIM, size=small, anchor="topleft")
        canvas.text((left + w - 16, y - 2), value, pal.TEXT_ALERT if alert else pal.TEXT, size=big, anchor="topright")
        y += big + 6
    y = _rule(canvas, left, y + 4, w)
    state = f"{'playing' if playing else 'paused'}   {speed:g}x" + ("   follow" if follow else "")
    canvas.text((x, y), state, pal.TEXT, size=big)
    y = _rule(canvas, left, y + big + 8, w)
    y = _key(canvas, x, y, w, small, scene, on, units)
    canvas.text((x, top + h - small - 12), "h  keys and layers", pal.TEXT_DIM, size=small)


def _key(canvas: Canvas, x: int, y: int, w: int, size: int, scene: Scene, on: frozenset[str], units: str) -> int:
    sw = size
    rows = [("true footprint", pal.TRUTH, True), ("estimate", pal.ESTIMATE, False),
            ("reference", pal.REFERENCE, False), ("tracker target", pal.TARGET, False),
            ("collision", pal.COLLISION, True)]
    for label, color, filled in rows:
        if filled:
            canvas.rect((x, y + 2, sw, sw - 4), fill=color)
        else:
            canvas.rect((x, y + 2, sw, sw - 4), edge=color, width=3)
        canvas.text((x + sw + 10, y), label, pal.TEXT if _shown(label, on) else pal.TEXT_DIM, size=size)
        y += size + 6
    if len(scene.path) >= 2 and scene.path_speed.size:
        top = float(np.nanmax(scene.path_speed))
        canvas.text((x, y + 4), "planned speed", pal.TEXT_DIM, size=size)
        y += size + 8
        bar = w - 32
        cols = pal.ramp(np.linspace(0.0, 1.0, bar))
        for i in range(bar):
            canvas.rect((x + i, y, 1, 12), fill=tuple(int(c) for c in cols[i]))
        y += 16
        canvas.text((x, y), "0", pal.TEXT_DIM, size=size)
        canvas.text((x + bar, y), speed_text(top, units), pal.TEXT_DIM, size=size, anchor="topright")
        y += size + 4
    return y


def _shown(label: str, on: frozenset[str]) -> bool:
    names = {"true footprint": "true footprint", "estimate": "estimate + ellipse", "reference": "reference pose",
             "tracker target": "tracker target", "collision": "collision marks"}
    return names[label] in on


def _rule(canvas: Canvas, left: int, y: int, w: int) -> int:
    canvas.rect((left + 12, y, w - 24, 1), fill=pal.PANEL_RULE)
    return y + 10


def _wrap(canvas: Canvas, text: str, width: int, size: int, *, bold: bool = False) -> list[str]:
    words, lines, cur = text.split(), [], ""
    for word in words:
        trial = f"{cur} {word}".strip()
        if canvas.text_size(trial, size=size, bold=bold)[0] <= width or not cur:
            cur = trial
        else:
            lines.append(cur)
            cur = word
    return lines + ([cur] if cur else [])


def draw_timeline(canvas: Canvas, rect: Rect, scene: Scene, k: int, worst: int | None) -> None:
    """Progress bar across the bottom: elapsed part, the cursor, the worst moment's tick."""
    left, top, w, h = rect
    canvas.rect(rect, fill=pal.TIMELINE)
    horizon = max(scene.ticks(), 1)  # a live run's bar ends at its newest tick
    bar = (left + 12, top + h // 2 - 3, w - 24, 6)
    canvas.rect(bar, fill=pal.PANEL_RULE)
    frac = min(1.0, k / max(horizon - 1, 1))
    canvas.rect((bar[0], bar[1], int(bar[2] * frac), bar[3]), fill=pal.TIMELINE_FILL)
    if worst is not None:
        wx = bar[0] + int(bar[2] * worst / max(horizon - 1, 1))
        canvas.rect((wx - 1, top + 6, 3, h - 12), fill=pal.COLLISION)
    cx = bar[0] + int(bar[2] * frac)
    canvas.rect((cx - 2, top + 4, 5, h - 8), fill=pal.TEXT)


def timeline_tick(rect: Rect, scene: Scene, x: float) -> int:
    """The tick under screen column ``x`` of the timeline."""
    left, _, w, _ = rect
    horizon = max(scene.ticks(), 1)
    frac = (x - (left + 12)) / max(w - 24, 1)
    return round(min(1.0, max(0.0, frac)) * (horizon - 1))


def draw_scale_bar(canvas: Canvas, at: tuple[int, int], *, units: str) -> None:
    """A ruler of a round length near ``at`` (bottom-left corner of the field view) [px]."""
    unit = _IN if units == "in" else 1.0
    want = 120.0 * canvas.size[1] / 800.0 / canvas.transform.scale / unit
    nice = min((c * 10.0**e for e in range(-2, 4) for c in (1, 2, 5)), key=lambda v: abs(math.log(v / want)))
    length_px = round(nice * unit * canvas.transform.scale)
    x, y = at
    size = max(14, int(canvas.size[1] / 40))
    canvas.rect((x, y - 6, length_px, 6), fill=pal.WALL)
    canvas.rect((x, y - 12, 2, 12), fill=pal.WALL)
    canvas.rect((x + length_px - 2, y - 12, 2, 12), fill=pal.WALL)
    label = f"{nice:g} in" if units == "in" else (f"{nice * 100:g} cm" if nice < 1 else f"{nice:g} m")
    canvas.text((x + length_px + 8, y - 3), label, pal.WALL, size=size, anchor="midleft")


def draw_help(
    canvas: Canvas, rect: Rect, controls: Sequence[tuple[str, str]], layers: Sequence[tuple[str, str, bool]]
) -> None:
    """The help overlay: every control (left column) and every layer key with its state (right)."""
    size = max(14, min(24, int(rect[3] / (max(len(controls), len(layers)) + 3) - 6)))
    line = size + 6
    key_w = max(canvas.text_size(k, size=size)[0] for k, _ in [*controls, *[(k, n) for k, n, _ in layers]]) + 14
    col_w = [key_w + max(canvas.text_size(d, size=size)[0] for _, d in controls),
             key_w + max(canvas.text_size(f"{n}  (off)", size=size)[0] for _, n, _ in layers)]
    bw = min(rect[2] - 20, col_w[0] + col_w[1] + 80)
    bh = min(rect[3] - 20, (max(len(controls), len(layers)) + 2) * line + 24)
    left = rect[0] + (rect[2] - bw) // 2
    top = rect[1] + (rect[3] - bh) // 2
    canvas.rect((left, top, bw, bh), fill=pal.OVERLAY, edge=pal.PANEL_RULE, width=2)
    columns = [("keys", [(k, d, True) for k, d in controls]),
               ("layers", [(k, f"{n}  ({'on' if s else 'off'})", s) for k, n, s in layers])]
    x = left + 24
    for (head, rows), cw in zip(columns, col_w):
        y = top + 14
        canvas.text((x, y), head, pal.TEXT, size=size, bold=True)
        y += line + 4
        for key, does, bright in rows:
            canvas.text((x, y), key, pal.ORANGE, size=size)
            canvas.text((x + key_w, y), does, pal.TEXT if bright else pal.TEXT_DIM, size=size)
            y += line
        x += cw + 32
