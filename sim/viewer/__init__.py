"""The optional pygame viewer: live runs, replays of saved runs and batches, PNG snapshots.

This package is the only part of skidpad that imports pygame, and only when something is drawn:
``import sim.viewer`` itself needs no pygame and no display. :func:`snapshot` draws one frame
off-screen with the same code as the window.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from planners.errors import SkidpadError

if TYPE_CHECKING:  # pragma: no cover
    from planners.plan import Plan
    from sim.scenario import Scenario
    from sim.trace import Trace

INSTALL_HINT = "pip install pygame"


class ViewerError(SkidpadError, RuntimeError):
    """The viewer cannot run here (no pygame, no display)."""


def require_pygame():
    """Import pygame quietly, or raise :class:`ViewerError` with the install hint."""
    os.environ.setdefault("PYGAME_HIDE_SUPPORT_PROMPT", "1")
    try:
        import pygame
    except ImportError:
        raise ViewerError(f"the viewer needs pygame, which is not installed; install it with: {INSTALL_HINT}") from None
    return pygame


def display_problem() -> str | None:
    """Why no window can open here, or ``None`` when a display seems available."""
    driver = os.environ.get("SDL_VIDEODRIVER", "")
    if driver in ("dummy", "offscreen"):
        return f"SDL_VIDEODRIVER={driver} has no screen"
    if sys.platform.startswith("linux") and not driver:
        if not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
            return "no display found (DISPLAY and WAYLAND_DISPLAY are unset)"
    return None


def no_display_message(reason: str) -> str:
    """The one line printed when no window can open."""
    return f"cannot open a window: {reason}; draw a PNG instead with: skidpad run SCENARIO --snapshot FILE.png"


def snapshot(
    source: Trace | object,
    scenario: Scenario,
    plan: Plan | None,
    path: str | os.PathLike,
    *,
    tick: int | None = None,
    run: int | None = None,
    size: tuple[int, int] = (1280, 800),
    units: str = "m",
    statuses: Sequence[str] | None = None,
) -> Path:
    """Draw one frame of a run to a PNG file, without a window.

    Parameters
    ----------
    source : Trace, or a simulation with a ``recorder`` (what it recorded so far is drawn)
    scenario : Scenario — field and robot of the run
    plan : Plan or None — for the path colours (None: the runner's plan, else the reference)
    path : the PNG file to write
    tick : tick to draw (default: the last one recorded)
    run : run index k to highlight (default: the first recorded)
    size : image width, height [px]
    units : "m" or "in" for the panel
    statuses : final status of each recorded run (e.g. the scorecard's), shown after its end;
        read from the simulation when ``source`` is one

    Returns
    -------
    Path — the file written
    """
    require_pygame()
    from sim.trace import Trace
    from sim.viewer.app import Viewer
    from sim.viewer.sources import scene_from_trace

    if isinstance(source, Trace):
        trace = source
    else:
        trace, statuses = _recorded(source)
    scene = scene_from_trace(trace, scenario, plan, highlight_run=run, label="snapshot", statuses=statuses)
    viewer = Viewer(scene, size=size, units=units, playing=False)
    viewer.seek(scene.ticks() - 1 if tick is None else tick)
    viewer.render()
    import pygame

    out = Path(path)
    out.parent.mkdir(parents=True, exist_ok=True)
    pygame.image.save(viewer.canvas.surface, str(out))
    return out


def _recorded(sim: object) -> tuple[Trace, list[str] | None]:
    """What a simulation has recorded so far, with each recorded robot's status."""
    import numpy as np

    rec = sim.recorder
    active = np.asarray(getattr(sim, "active", np.ones(max(rec.columns.max(initial=0) + 1, 1), dtype=bool)))
    ended = np.asarray(getattr(sim, "end_tick", np.zeros(len(active), dtype=np.int64)))
    end = np.where(active, rec.k - 1, ended)
    status = getattr(sim, "status", None)
    statuses = [str(status[c]) if not active[c] else "running" for c in rec.columns] if status is not None else None
    return rec.finish(end), statuses
