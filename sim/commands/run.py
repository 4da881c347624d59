"""``skidpad run [SCENARIO]``: run one scenario, print a summary, write its results."""

from __future__ import annotations

import argparse
import json
import os
from collections.abc import Sequence
from pathlib import Path

from sim.commands import add_set_option
from sim.scenario import Scenario, default_scenario_path, load_scenario
from sim.toml_files import comment_block


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "run",
        help="run one scenario and score it",
        description=(
            "Run one scenario (the bundled default when none is given), print a summary and "
            "write scorecard.json, trace.npz, the resolved scenario.toml and plot.png."
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenario", nargs="?", help="scenario TOML file (default: the bundled workshop loop)")
    p.add_argument("--out", help="output folder (default: skidpad-out/<scenario name>)")
    p.add_argument("--seed", type=int, help="base seed (overrides run.seed)")
    p.add_argument("--run", type=int, default=0, metavar="K", help="run index k within the seed (default 0)")
    p.add_argument("--csv", action="store_true", help="also write trace.csv")
    p.add_argument(
        "--log", metavar="LOG.csv",
        help="also write the run as a robot log (the format `identify` and `replay` read)",
    )
    p.add_argument("--snapshot", metavar="FILE.png", help="also draw the final frame with the viewer's drawing code")
    p.add_argument("--no-plot", action="store_true", help="skip plot.png")
    p.add_argument("--units", choices=("m", "in"), default="m", help="units of the printed summary")
    add_set_option(p)
    p.set_defaults(handler=run)


def write_resolved(
    scenario: Scenario, seed: int, folder: Path, *, name: str = "scenario.toml", comment: Sequence[str] = ()
) -> Path:
    """Write the scenario as run (overrides applied, seed fixed) and a copy of its field.

    The copy makes the folder self-contained: ``skidpad run FOLDER/scenario.toml`` repeats
    the run exactly anywhere. ``comment`` lines head the file as ``#`` comments.
    """
    import tomli_w

    doc = json.loads(json.dumps(scenario.document))
    doc.setdefault("run", {})["seed"] = seed
    field_name = f"{Path(name).stem}.field.toml"
    doc["field"] = field_name
    (folder / field_name).write_bytes(Path(scenario.field.source).read_bytes())
    path = folder / name
    head = comment_block(comment)
    path.write_text(head + ("\n" if head else "") + tomli_w.dumps(doc))
    return path


def run(args: argparse.Namespace) -> int:
    from sim.runner import Simulation
    from sim.summary import print_scorecard

    path = args.scenario or str(default_scenario_path())
    overrides = list(args.overrides)
    if args.seed is not None:
        overrides.append(f"run.seed={args.seed}")
    sc = load_scenario(path, overrides)
    out = Path(args.out or os.path.join("skidpad-out", Path(path).stem))
    out.mkdir(parents=True, exist_ok=True)
    sim = Simulation(sc, runs=[args.run], keep=[args.run])
    for note in sim.notes:
        print(f"note: {note}")
    if args.log:
        from sim.log_recorder import run_logged

        log_path = run_logged(sim).write(args.log)
        result = sim.results()[0]
    else:
        result = sim.run()[0]
    card = {"scenario": sc.title, "seed": sc.run.seed, "run": args.run, **result.scorecard}
    (out / "scorecard.json").write_text(json.dumps(card, indent=2) + "\n")
    trace = sim.trace()
    trace.save(out / "trace.npz")
    write_resolved(sc, sc.run.seed, out)
    if args.csv:
        trace.to_csv(out / "trace.csv")
    if not args.no_plot:
        from sim.report import run_plot

        run_plot(trace, sim.plan, sc.field, out / "plot.png", title=sc.title)
    if args.snapshot:
        from sim.viewer import snapshot

        snapshot(trace, sc, sim.plan, args.snapshot, statuses=[result.scorecard["status"]])
    print_scorecard(card, units=args.units)
    print(f"wrote {out}/scorecard.json, trace.npz, scenario.toml" + ("" if args.no_plot else ", plot.png"))
    if args.log:
        print(f"wrote robot log {log_path}")
    return 0
