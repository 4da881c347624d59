"""``skidpad check FILE...``: validate scenario and field files and summarise each."""

from __future__ import annotations

import argparse
import sys

from planners.errors import SkidpadError
from sim.scenario import load_field, load_scenario, read_toml


def add_parser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "check",
        help="validate scenario and field files",
        description="Validate scenario and field files; print one summary line per file.",
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="scenario or field TOML files")
    p.set_defaults(handler=run)


def summarise(path: str) -> str:
    """One line describing a valid scenario or field file (raises SkidpadError if invalid)."""
    doc = read_toml(path)
    if "boundary" in doc and "robot" not in doc:
        fld = load_field(path)
        x0, y0, x1, y1 = fld.bounds
        return (
            f"{path}: field {fld.name!r}, {x1 - x0:.2f} m x {y1 - y0:.2f} m, "
            f"{len(fld.obstacles)} obstacles, {len(fld.landmarks)} landmarks, {len(fld.patches)} patches"
        )
    from sim.planning import make_plan

    sc = load_scenario(path)
    if sc.route.waypoints:
        plan = make_plan(sc)  # a route that cannot be driven is an error here too
        route = f"route {len(sc.route.waypoints)} waypoints, {plan.length:.2f} m path, {plan.duration:.1f} s plan"
    else:
        route = "no route (open-loop script)"
    x0, y0, x1, y1 = sc.field.bounds
    return (
        f"{path}: {sc.title!r}: {sc.robot.chassis} chassis, {sc.robot.mass:g} kg; {route}; "
        f"field {sc.field.name!r} {x1 - x0:.2f} m x {y1 - y0:.2f} m; "
        f"tracker {sc.tracker.kind}, estimator {sc.estimator.kind}"
    )


def run(args: argparse.Namespace) -> int:
    failed = 0
    for path in args.files:
        try:
            print(summarise(path))
        except SkidpadError as exc:
            print(str(exc), file=sys.stderr)
            failed += 1
    return 2 if failed else 0
