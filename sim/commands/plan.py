"""``skidpad plan SCENARIO``: time the route and say which limit binds where."""

from __future__ import annotations

import argparse
import math

from sim.commands import add_set_option
from sim.scenario import default_scenario_path, load_scenario


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "plan",
        help="time a route and show its binding limits; export it as CSV",
        description=(
            "Turn the scenario's route into a timed plan under the robot's limits; print its "
            "length, duration, peak speed and which limit binds where. --csv exports one row per "
            "control tick (t, x, y, heading, vx, vy, omega, ax, ay, alpha, curvature, s) for use in "
            "a robot's own code. " + SAFETY
        ),
        epilog=SAFETY,
    )
    p.add_argument("scenario", nargs="?", help="scenario TOML file (default: the bundled workshop loop)")
    p.add_argument("--csv", metavar="FILE", help="write the plan, one row per control tick")
    p.add_argument("--plot", metavar="FILE.png", help="draw the path coloured by speed and the speed profile")
    add_set_option(p)
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from planners.timing import plan_summary
    from sim.cli import SAFETY
    from sim.planning import make_plan

    path = args.scenario or str(default_scenario_path())
    sc = load_scenario(path, args.overrides)
    plan = make_plan(sc)
    s = plan_summary(plan)
    print(f"{sc.title}: {s['length_m']:.2f} m in {s['duration_s']:.2f} s at {1 / plan.dt:g} Hz")
    print(
        f"  peak speed {s['peak_speed_mps']:.2f} m/s (mean {s['mean_speed_mps']:.2f}), "
        f"peak accel {s['peak_accel_mps2']:.2f} / decel {s['peak_decel_mps2']:.2f} m/s^2, "
        f"peak lateral {s['peak_lateral_accel_mps2']:.2f} m/s^2, "
        f"peak turn {math.degrees(s['peak_turn_rate_radps']):.0f} deg/s"
    )
    for name, share in sorted(s["time_share"].items(), key=lambda kv: -kv[1]):
        print(f"  {name:>18}: binds {100 * share:5.1f} % of the moving time")
    for run_ in s["binding"][:40]:
        print(
            f"    {run_['t_start']:7.2f}-{run_['t_end']:7.2f} s  s={run_['s_start']:6.2f}-{run_['s_end']:6.2f} m  "
            f"{run_['limit']}"
        )
    if len(s["binding"]) > 40:
        print(f"    ... {len(s['binding']) - 40} more")
    if args.csv:
        from sim.plan_export import write_plan_csv

        write_plan_csv(plan, args.csv)
        print(f"wrote {args.csv}")
        print(SAFETY)
    if args.plot:
        from sim.plan_export import write_plan_plot

        write_plan_plot(plan, args.plot, free_space=sc.field.free_space, title=sc.title)
        print(f"wrote {args.plot}")
    return 0
