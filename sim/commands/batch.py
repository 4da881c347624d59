"""``skidpad batch SCENARIO... --runs N --out DIR``: many seeded runs, sweeps, resume."""

from __future__ import annotations

import argparse
import contextlib

from sim.commands import add_set_option

#: figure -> column label of the terminal table
TABLE_KEYS = {
    "cross_track_p95_m": "xtrack p95", "cross_track_max_m": "xtrack max", "end_position_error_m": "end pos",
    "end_heading_error_rad": "end hdg", "estimate_error_rms_m": "est rms", "duration_s": "time",
}


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "batch",
        help="run many seeded runs of scenarios and sweep points",
        description=(
            "Run N runs of each scenario at each sweep point; write DIR/results.csv (one row per "
            "run, appended as work finishes), DIR/summary.csv, DIR/summary.png, the resolved "
            "scenarios and any kept traces. `skidpad run SCENARIO --seed s --run k` repeats row k."
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenarios", nargs="+", metavar="SCENARIO", help="scenario TOML files")
    p.add_argument("--runs", type=int, help="runs per scenario and sweep point (default: run.runs)")
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--sweep", action="append", default=[], metavar="KEY=V1,V2",
                   help="sweep a scenario key over values (repeatable; the product is swept)")
    p.add_argument("--jobs", type=int, default=1, metavar="J", help="worker processes (default 1)")
    p.add_argument("--executor", choices=("serial", "processes", "dask"), default="serial",
                   help="where units run (dask needs pip install 'skidpad[cluster]')")
    p.add_argument("--scheduler", metavar="ADDRESS", help="dask scheduler, e.g. tcp://10.0.0.5:8786")
    p.add_argument("--resume", action="store_true", help="keep DIR/results.csv and run only missing runs")
    p.add_argument("--keep-traces", default="none", metavar="worst:K|runs:0,3|none",
                   help="save traces of the K worst runs (by cross_track_max_m) or of listed runs")
    p.add_argument("--chunk", type=int, default=256, help="most runs stepped together (default 256)")
    p.add_argument("--units", choices=("m", "in"), default="m", help="units of the printed summary")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    add_set_option(p)
    p.set_defaults(handler=batch)


def batch(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from sim.batch import make_groups, run_batch

    from sim.batch import parse_keep
    from sim.batch_executors import _distributed, make_pool

    # input errors before the progress bar appears
    parse_keep(args.keep_traces)
    if args.executor == "dask":
        _distributed()
    groups = make_groups(args.scenarios, args.sweep, args.overrides)
    total = sum(args.runs if args.runs is not None else int(g.scenario.run.runs) for g in groups)
    console = Console()
    # worker processes before the progress display's thread, so that they can be forked
    pool = make_pool(args.jobs) if args.executor == "processes" else None
    progress = Progress(
        TextColumn("runs"), BarColumn(), MofNCompleteColumn(), TextColumn("failed {task.fields[failed]}"),
        TextColumn("left"), TimeRemainingColumn(), console=console, disable=args.no_progress,
    )
    with contextlib.ExitStack() as stack:
        if pool is not None:
            stack.callback(pool.shutdown, wait=True, cancel_futures=True)
        stack.enter_context(progress)
        task = progress.add_task("batch", total=total, failed=0)
        done0 = 0
        if args.resume:
            from sim.batch_results import read_results

            done0 = len(read_results(f"{args.out}/results.csv")[1])  # resumed rows count as done
            progress.update(task, completed=done0)

        def on_unit(ran: int, failures: int) -> None:
            progress.update(task, completed=done0 + ran, failed=failures)

        outcome = run_batch(
            args.scenarios, out=args.out, runs=args.runs, sweeps=args.sweep, overrides=args.overrides,
            executor=args.executor, jobs=args.jobs, scheduler=args.scheduler, resume=args.resume,
            keep_traces=args.keep_traces, chunk=args.chunk, on_unit=on_unit, pool=pool,
        )
    print_summary(outcome.summary, outcome.sweep_keys, units=args.units, console=console)
    console.print(f"wrote {args.out}/results.csv ({len(outcome.rows)} rows, {outcome.failures} failed this time), "
                  f"summary.csv, summary.png" + (f", {len(outcome.traces)} traces" if outcome.traces else ""))
    return 0


def print_summary(summary: list[dict], sweep_keys: list[str], *, units: str = "m", console=None) -> None:
    """A compact table: one line per group, p95 of the key figures in cm / deg / s (or in)."""
    import math

    from rich.console import Console
    from rich.table import Table

    from sim.summary import show

    console = console or Console()
    table = Table(title="batch summary (p95 over runs)", title_justify="left")
    for col in ("scenario", *sweep_keys, "n", "done %"):
        table.add_column(col, overflow="fold")
    for key in TABLE_KEYS:
        table.add_column(TABLE_KEYS[key], justify="right", no_wrap=True)
    for s in summary:
        cells = [str(s["scenario"]), *(str(s.get(k, "")) for k in sweep_keys), str(s["n"]),
                 f"{100 * s['completion_rate']:.0f}"]
        for key in TABLE_KEYS:
            v = s.get(f"{key}_p95", math.nan)
            cells.append("-" if v != v else show(key, v, units))
        table.add_row(*cells)
    console.print(table)
