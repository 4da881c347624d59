"""``skidpad replay LOG.csv --estimator KIND``: a logged sensor stream through an estimator."""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

import numpy as np

from planners.errors import ScenarioError


def add_parser(sub: argparse._SubParsersAction) -> None:
    from sim.cli import SAFETY

    p = sub.add_parser(
        "replay",
        help="run a robot log's sensor stream through an estimator",
        description=(
            "Feed a robot log (the CSV format of `skidpad run --log`; see DEVELOPERS.md) to an "
            "estimator, plot the estimated path on the field and, when the log holds a true pose "
            "or a reference, report how far the estimate was from it. Geometry and sensor noise "
            "figures come from --scenario, else from the log's metadata."
        ),
        epilog=SAFETY,
    )
    p.add_argument("log", help="robot log CSV")
    p.add_argument("--estimator", default="ekf", help="estimator kind (default ekf)")
    p.add_argument("--scenario", help="scenario whose robot, sensors, field and estimator settings to use")
    p.add_argument("--field", help="field TOML to draw and to give the estimator (overrides the scenario's)")
    p.add_argument("--start", help="start pose 'x,y,heading_deg' (default: the log's first reference, truth or fix)")
    p.add_argument("--seed", type=int, default=0, help="seed for estimators that draw (default 0)")
    p.add_argument("--out", help="output folder (default: skidpad-out/replay-<log name>)")
    p.add_argument("--json", action="store_true", help="print the comparison as one JSON object")
    p.set_defaults(handler=run)


def _start(text: str | None) -> tuple[float, float, float] | None:
    if text is None:
        return None
    parts = text.split(",")
    try:
        x, y, h = (float(v) for v in parts)
    except ValueError:
        raise ScenarioError(f"--start must be 'x,y,heading_deg' (three numbers), got {text!r}") from None
    return x, y, math.radians(h)


def run(args: argparse.Namespace) -> int:
    from planners.robot_log import read_log
    from sim.field_file import load_field
    from sim.replay import replay
    from sim.scenario import load_scenario

    log = read_log(args.log)
    scenario = load_scenario(args.scenario) if args.scenario else None
    field = load_field(args.field) if args.field else None
    result = replay(log, args.estimator, scenario=scenario, field=field, start=_start(args.start), seed=args.seed)
    out = Path(args.out or Path("skidpad-out") / f"replay-{Path(args.log).stem}")
    out.mkdir(parents=True, exist_ok=True)
    est = result.estimate
    np.savetxt(
        out / "replay.csv", np.column_stack([result.t, est]), delimiter=",",
        header="t [s],x [m],y [m],heading [rad]", comments="", fmt="%.6f",
    )
    _plot(result, field or (scenario.field if scenario else None), out / "replay.png", Path(args.log).name)
    comparison = result.compare()
    if args.json:
        print(json.dumps({"estimator": result.kind, "log": args.log, **comparison}))
        return 0
    print(f"replayed {len(result.t)} rows ({result.t[-1] - result.t[0]:.2f} s) through {result.kind}")
    for name, c in comparison.items():
        print(
            f"  against the {name}: position RMS {100 * c['position_rms']:.2f} cm, max "
            f"{100 * c['position_max']:.2f} cm, final {100 * c['final_position']:.2f} cm, "
            f"final heading {c['final_heading_deg']:.2f} deg"
        )
    if not comparison:
        print("  the log has no true pose or reference to compare with")
    print(f"wrote {out}/replay.csv, replay.png")
    return 0


def _plot(result, field, path: Path, title: str) -> None:
    from sim.report import ESTIMATE, PLAN, TRUTH, _pyplot, draw_field

    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 6))
    if field is not None:
        draw_field(ax, field)
    else:
        ax.set_aspect("equal")
        ax.set_xlabel("x [m]")
        ax.set_ylabel("y [m]")
    if result.reference is not None:
        ax.plot(result.reference[:, 0], result.reference[:, 1], color=PLAN, ls="--", lw=1, label="reference")
    if result.truth is not None:
        ax.plot(result.truth[:, 0], result.truth[:, 1], color=TRUTH, lw=1.5, label="truth")
    ax.plot(result.estimate[:, 0], result.estimate[:, 1], color=ESTIMATE, lw=1, label=f"estimate ({result.kind})")
    ax.legend(loc="best", fontsize=8)
    ax.set_title(title)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
