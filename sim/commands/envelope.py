"""``skidpad envelope SCENARIO --speed LO..HI --mu LO..HI --runs N``: how fast, on which floor."""

from __future__ import annotations

import argparse
from pathlib import Path

from sim.commands import add_set_option


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "envelope",
        help="completion and end error over route speed scale x floor friction",
        description=(
            "Run N runs at every point of a grid of route speed scale (route.speed_scale: speeds "
            "x c, accelerations x c^2) and floor friction (robot.traction.mu), or of any two numeric "
            "keys with --x/--y, the same runs at every point. A run succeeds when it completes, "
            "touches no wall or obstacle and never strays more than --max-cross-track from its path. "
            "A point is within the envelope when >= 95% of its runs succeed and the 95th percentile "
            "of end_position_error_m over the runs is <= --tolerance. Prints, for each y, the largest "
            "x such that it and every smaller x are within the envelope; writes DIR/envelope.csv "
            "and DIR/envelope.png."
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    p.add_argument("--speed", metavar="LO..HI", help="route speed scale range (default 0.4..1.2)")
    p.add_argument("--mu", metavar="LO..HI", help="friction coefficient range (default 0.5..1.0)")
    p.add_argument("--x", metavar="KEY=LO..HI", help="any numeric key for the x axis (instead of --speed)")
    p.add_argument("--y", metavar="KEY=LO..HI", help="any numeric key for the y axis (instead of --mu)")
    p.add_argument("--runs", type=int, default=20, help="runs per grid point (default 20)")
    p.add_argument("--steps", default="5x4", metavar="NXxNY", help="grid values along x and y (default 5x4)")
    p.add_argument("--tolerance", default="0.05 m", metavar="LENGTH", help="largest p95 end error (default 0.05 m)")
    p.add_argument("--max-cross-track", metavar="LENGTH",
                   help="largest distance from the path of a successful run (default: half the robot's "
                        "footprint width, where its body stops covering the path)")
    p.add_argument("--workers", type=int, default=1, metavar="W", help="worker processes (default 1)")
    p.add_argument("--out", help="output folder (default: skidpad-out/<scenario name>-envelope)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    add_set_option(p)
    p.set_defaults(handler=run)


def axes_from(args: argparse.Namespace) -> tuple[str, str]:
    """The ``KEY=lo..hi`` of both axes from --speed/--mu or --x/--y."""
    from planners.errors import SkidpadError
    from sim.envelope import MU_KEY, SPEED_KEY

    if args.speed and args.x:
        raise SkidpadError(f"{args.scenario}: give --speed or --x for the x axis, not both")
    if args.mu and args.y:
        raise SkidpadError(f"{args.scenario}: give --mu or --y for the y axis, not both")
    x = args.x or f"{SPEED_KEY}={args.speed or '0.4..1.2'}"
    y = args.y or f"{MU_KEY}={args.mu or '0.5..1.0'}"
    return x, y


def fastest_text(f, xs, option: str) -> str:
    """One table cell: the fastest safe x, "at least x" at the top of the grid, or "none"."""
    if f.x is None:
        text = f"none (even {xs[0]:.3g} fails: lower {option})"
    elif f.at_top:
        text = f"at least {f.x:.3g}: widen {option}"
    else:
        text = f"{f.x:.3g}"
    if f.above:
        text += f" (also within above a failing value: {', '.join(f'{v:.3g}' for v in f.above)}; not trusted)"
    return text


def run(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeRemainingColumn,
    )
    from rich.table import Table

    from sim.cli import SAFETY
    from sim.envelope import check_inputs, envelope, parse_steps
    from sim.search_plots import envelope_plot

    x, y = axes_from(args)
    steps = parse_steps(args.steps, where=args.scenario)
    check_inputs(args.scenario, runs=args.runs, x=x, y=y, tolerance=args.tolerance,
                 overrides=args.overrides, max_cross_track=args.max_cross_track)  # errors before the progress bar
    out = Path(args.out or f"skidpad-out/{Path(args.scenario).stem}-envelope")
    console = Console()
    progress = Progress(TextColumn("grid points"), BarColumn(), MofNCompleteColumn(), TextColumn("left"),
                        TimeRemainingColumn(), console=console, disable=args.no_progress)
    with progress:
        task = progress.add_task("envelope", total=steps[0] * steps[1])
        o = envelope(
            args.scenario, runs=args.runs, x=x, y=y, steps=steps, tolerance=args.tolerance,
            max_cross_track=args.max_cross_track, overrides=args.overrides, workers=args.workers,
            csv_path=out / "envelope.csv",
            on_point=lambda r: progress.update(task, advance=1),
        )
    envelope_plot(o.xs, o.ys, o.success, o.end_p95, o.within, x_label=o.x.label, y_label=o.y.label,
                  path=out / "envelope.png",
                  title=f"{args.runs} runs per cell: % that arrived without collision within "
                        f"{100 * o.max_cross_track:.3g} cm of the path; outlined: >= 95% and p95 end error <= "
                        f"{100 * o.tolerance:g} cm")
    option = "--x" if args.x else "--speed"
    table = Table(title=f"fastest {o.x.key} such that it and every slower grid value are within the envelope",
                  title_justify="left")
    table.add_column(o.y.key)
    table.add_column(o.x.key)
    for f in reversed(o.fastest()):
        table.add_row(f"{f.y:.3g}", fastest_text(f, o.xs, option))
    console.print(table)
    console.print(f"wrote {out}/envelope.csv ({o.within.size} grid points), envelope.png")
    console.print(SAFETY)
    return 0
