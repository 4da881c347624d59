"""``skidpad view [SCENARIO | RUN_DIR | TRACE.npz | BATCH_DIR]``: watch a run in a window."""

from __future__ import annotations

import argparse
import re
from pathlib import Path

from planners.errors import ScenarioError
from sim.commands import add_set_option


def add_parser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "view",
        help="watch a run live, or replay saved runs, in a window",
        description=(
            "Run a scenario live in a resizable window, or replay a saved run (a run folder or "
            "trace.npz) or a batch folder (every run at once, faint, the chosen run highlighted). "
            "Press h in the window for the keys. Without a display, draw a PNG with "
            "'skidpad run SCENARIO --snapshot FILE.png'."
        ),
    )
    p.add_argument("target", nargs="?", metavar="SCENARIO|RUN_DIR|TRACE.npz|BATCH_DIR",
                   help="scenario TOML to run live (default: the bundled workshop loop), or saved runs to replay")
    p.add_argument("--run", type=int, metavar="K", help="run index k to run live, or to highlight in a replay")
    p.add_argument("--scenario", metavar="FILE|NAME",
                   help="replay only: the scenario of the traces, when it is not beside them or there are several")
    p.add_argument("--units", choices=("m", "in"), default="m", help="units of the status panel")
    p.add_argument("--speed", type=float, default=1.0, help="initial playback speed, 0.1 to 50 (default 1)")
    p.add_argument("--size", default="1280x800", metavar="WxH", help="initial window size (default 1280x800)")
    p.add_argument("--shots", default=".", metavar="DIR", help="folder for screenshots (key s; default .)")
    add_set_option(p)
    p.set_defaults(handler=run)


def _size(text: str) -> tuple[int, int]:
    m = re.fullmatch(r"\s*(\d+)\s*[xX]\s*(\d+)\s*", text)
    if not m or not (320 <= int(m.group(1)) <= 10000 and 240 <= int(m.group(2)) <= 10000):
        raise ScenarioError(f"--size must be WIDTHxHEIGHT of at least 320x240, got {text!r}")
    return int(m.group(1)), int(m.group(2))


def build_scene(args: argparse.Namespace):
    """The scene a ``skidpad view`` command line asks for (no window, no pygame)."""
    from sim.scenario import default_scenario_path, load_scenario
    from sim.viewer.sources import live_scene, load_replay

    target = args.target or str(default_scenario_path())
    path = Path(target)
    if path.suffix == ".toml":
        if args.scenario:
            raise ScenarioError("--scenario applies to replays; for a live run give the scenario file itself")
        return live_scene(load_scenario(path, args.overrides), run=args.run or 0)
    if args.overrides:
        raise ScenarioError(f"{target}: --set applies to a scenario file; a saved run replays as it was recorded")
    return load_replay(path, scenario=args.scenario, highlight_run=args.run)


def run(args: argparse.Namespace) -> int:
    from sim.viewer import ViewerError, display_problem, no_display_message, require_pygame

    if not 0.1 <= args.speed <= 50.0:
        raise ScenarioError(f"--speed must be between 0.1 and 50, got {args.speed:g}")
    size = _size(args.size)
    require_pygame()
    reason = display_problem()
    if reason:
        raise ViewerError(no_display_message(reason))
    scene = build_scene(args)
    from sim.viewer.app import run_window

    run_window(scene, size=size, units=args.units, shots=args.shots, speed=args.speed)
    return 0
