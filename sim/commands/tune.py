"""``skidpad tune SCENARIO --param KEY=lo..hi ... --runs N --objective ... --budget K``."""

from __future__ import annotations

import argparse
import math
from pathlib import Path

from sim.commands import add_set_option


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY
    from sim.tune import OBJECTIVES, describe_objective

    p = sub.add_parser(
        "tune",
        help="search scenario keys (gains, lookahead, ...) for the best batch objective",
        description=(
            "Minimise a batch objective over a box of scenario keys with differential evolution. "
            "Every candidate runs the same runs 0..N-1 of the scenario's seed (common random numbers). "
            "A run that does not complete scores max(figure, --fail-penalty) (duration: its timeout). "
            "Objectives: " + "; ".join(f"{k} = {describe_objective(k)}" for k in OBJECTIVES) + ". "
            "Writes DIR/tune.csv (every candidate), DIR/tune.png and DIR/tuned.toml (the scenario "
            "with the best values)."
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    p.add_argument("--param", action="append", required=True, metavar="KEY=LO..HI",
                   help="a key and its range, e.g. tracker.lookahead=0.1m..0.6m (repeatable)")
    p.add_argument("--runs", type=int, default=20, help="runs per candidate (default 20)")
    p.add_argument("--objective", choices=list(OBJECTIVES), default="cross_track_p95",
                   help="what to minimise (default cross_track_p95)")
    p.add_argument("--budget", type=int, default=30, metavar="K", help="most candidates evaluated (default 30)")
    p.add_argument("--workers", type=int, default=1, metavar="W", help="worker processes (default 1)")
    p.add_argument("--fail-penalty", default="1 m", metavar="LENGTH",
                   help="score of a run that does not complete, for the error objectives (default 1 m)")
    p.add_argument("--seed", type=int, default=0, help="seed of the search's own draws (default 0)")
    p.add_argument("--out", help="output folder (default: skidpad-out/<scenario name>-tune)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    add_set_option(p)
    p.set_defaults(handler=run)


def _show(value: float, unit: str) -> str:
    return "-" if math.isnan(value) else f"{value:.4g} {unit}".rstrip()


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
    from sim.commands.run import write_resolved
    from sim.param_space import override
    from sim.scenario import load_scenario
    from sim.search_plots import tune_plot
    from sim.tune import IDENTICAL, OBJECTIVES, check_inputs, describe_objective, improvement_interval, tune

    check_inputs(args.scenario, args.param, runs=args.runs, objective=args.objective, budget=args.budget,
                 overrides=args.overrides, fail_penalty=args.fail_penalty)  # errors before the progress bar
    out = Path(args.out or f"skidpad-out/{Path(args.scenario).stem}-tune")
    console = Console()
    progress = Progress(
        TextColumn("candidates"), BarColumn(), MofNCompleteColumn(), TextColumn("best {task.fields[best]}"),
        TextColumn("left"), TimeRemainingColumn(), console=console, disable=args.no_progress,
    )
    unit = OBJECTIVES[args.objective].unit
    with progress:
        task = progress.add_task("tune", total=args.budget, best="-")
        best = [float("inf")]

        def on_candidate(c) -> None:
            best[0] = min(best[0], c.objective)
            progress.update(task, advance=1 if c.index >= 0 else 0, best=_show(best[0], unit))

        outcome = tune(
            args.scenario, args.param, runs=args.runs, objective=args.objective, budget=args.budget,
            overrides=args.overrides, workers=args.workers, fail_penalty=args.fail_penalty, seed=args.seed,
            csv_path=out / "tune.csv", on_candidate=on_candidate,
        )
    b, s = outcome.best, outcome.start
    table = Table(title=f"tune: {len(outcome.candidates)} candidates x {args.runs} runs", title_justify="left")
    for col in ("key", "range", "start", "best"):
        table.add_column(col)
    for j, a in enumerate(outcome.axes):
        table.add_row(a.key, f"{a.low:g}..{a.high:g} {a.unit}", _show(s.values[j], a.unit), _show(b.values[j], a.unit))
    console.print(table)
    gain, lo, hi, method = improvement_interval(s.scores, b.scores, args.objective, seed=args.seed)
    console.print(f"objective: {describe_objective(args.objective)}")
    console.print(f"  start {_show(s.objective, unit)} (completed {100 * s.completion:.0f}%)   "
                  f"best {_show(b.objective, unit)} (completed {100 * b.completion:.0f}%)")
    if method == IDENTICAL:
        if load_scenario(args.scenario, list(args.overrides)).run.vary:
            why = "their [run.vary] draws do not change the score"
        else:
            why = ("the scenario has no [run.vary], so the runs carry no randomness; add one "
                   "(e.g. mass = \"5 %\") to see how the gain holds across robots")
        console.print(f"  improvement {_show(gain, unit)}, no interval: all {args.runs} runs of each candidate "
                      f"scored the same ({why})", markup=False)
    else:
        console.print(f"  improvement {_show(gain, unit)}, 95% interval [{lo:.4g}, {hi:.4g}] {unit} "
                      f"({method}, same {args.runs} runs; measured on the runs the search chose on, so optimistic)")
    best_set = [override(a.key, v) for a, v in zip(outcome.axes, b.values)]
    tuned = load_scenario(args.scenario, [*args.overrides, *best_set])
    what = ", ".join(f"{a.key} = {v:.6g}" + (f" {a.unit}" if a.unit else "") for a, v in zip(outcome.axes, b.values))
    write_resolved(tuned, int(tuned.run.seed), out, name="tuned.toml", comment=[
        f"skidpad tune of {args.scenario}: {what} (best of {len(outcome.candidates)} candidates x "
        f"{args.runs} runs, {describe_objective(args.objective)} {_show(b.objective, unit)}); values in SI.",
        SAFETY,
    ])
    tune_plot(outcome, out / "tune.png")
    console.print("best as --set: " + " ".join(f"--set {a.key}={v:.6g}" for a, v in zip(outcome.axes, b.values)))
    console.print(f"wrote {out}/tune.csv ({len(outcome.candidates)} candidates), tune.png, tuned.toml")
    console.print(SAFETY)
    return 0
