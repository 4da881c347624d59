"""``skidpad drift SCENARIO --runs N --out DIR``: the odometry drift stress test."""

from __future__ import annotations

import argparse
from pathlib import Path

from sim.commands import add_set_option
from sim.scenario import load_scenario


def add_parser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "drift",
        help="stress-test odometry drift over randomised runs",
        description=(
            "Run a scenario N times with its randomisation and report, per odometry source the "
            "sensors allow, position error as % of distance travelled (mean, p95) and heading "
            "drift in deg/min; writes DIR/drift.csv and DIR/drift.png (error growth against distance)."
        ),
    )
    p.add_argument("scenario", help="scenario TOML file (try scenarios/greenhouse-drift.toml)")
    p.add_argument("--runs", type=int, help="number of runs (default: run.runs of the scenario)")
    p.add_argument("--out", default="skidpad-out/drift", help="output folder")
    add_set_option(p)
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.table import Table

    from sim.drift import drift_test, write_drift

    sc = load_scenario(args.scenario, args.overrides)
    runs = args.runs or sc.run.runs
    result = drift_test(sc, runs)
    write_drift(result, args.out, title=sc.title)
    table = Table(title=f"{sc.title}: odometry drift over {runs} runs", title_justify="left")
    for col in ("source", "position error mean", "p95", "heading drift mean", "p95"):
        table.add_column(col, justify="right")
    for r in result["rows"]:
        table.add_row(
            r["source"], f"{r['position_error_pct_mean']:.2f} %", f"{r['position_error_pct_p95']:.2f} %",
            f"{r['heading_drift_deg_per_min_mean']:.2f} deg/min", f"{r['heading_drift_deg_per_min_p95']:.2f} deg/min",
        )
    Console().print(table)
    print(f"wrote {Path(args.out) / 'drift.csv'} and drift.png")
    return 0
