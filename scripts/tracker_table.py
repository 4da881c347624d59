"""Regenerate the README's tracker x chassis table on the bundled route library.

Run from the repository root: ``python scripts/tracker_table.py`` (truth estimator, seed 1,
default gains). It rewrites the block between the TRACKER-TABLE markers of README.md.
"""

from __future__ import annotations

import re
from pathlib import Path

from planners.errors import SkidpadError
from planners.trackers import TRACKERS
from sim.runner import Simulation
from sim.scenario import load_scenario

ROOT = Path(__file__).resolve().parent.parent
ROUTES = ("figure-eight", "slalom", "square-dwell", "aisle-s", "hairpin", "long-straight")


def rows() -> list[str]:
    out = [
        "| route | chassis | tracker | status | cross-track RMS [cm] | cross-track max [cm] | end error [cm] |",
        "| --- | --- | --- | --- | ---: | ---: | ---: |",
    ]
    for route in ROUTES:
        for chassis in ("mecanum", "skid"):
            path = ROOT / "scenarios" / f"{route}-{chassis}.toml"
            for kind in TRACKERS.names():
                if kind == "voltage-script" or chassis not in TRACKERS.get(kind).CHASSIS:
                    continue
                try:
                    sc = load_scenario(path, [f'tracker={{kind="{kind}"}}', 'estimator={kind="truth"}'])
                    c = Simulation(sc, runs=[0]).run()[0].scorecard
                except SkidpadError as exc:
                    out.append(f"| {route} | {chassis} | {kind} | error: {exc} | | | |")
                    continue
                out.append(
                    f"| {route} | {chassis} | {kind} | {c['status']} | {100 * c['cross_track_rms_m']:.2f} | "
                    f"{100 * c['cross_track_max_m']:.2f} | {100 * c['end_position_error_m']:.2f} |"
                )
    return out


def main() -> None:
    readme = ROOT / "README.md"
    text = readme.read_text()
    table = "\n".join(rows())
    block = f"<!-- TRACKER-TABLE:START (scripts/tracker_table.py) -->\n{table}\n<!-- TRACKER-TABLE:END -->"
    new, count = re.subn(r"<!-- TRACKER-TABLE:START.*?TRACKER-TABLE:END -->", block, text, flags=re.S)
    if count == 0:
        raise SystemExit("README.md has no TRACKER-TABLE markers")
    readme.write_text(new)
    print(table)


if __name__ == "__main__":
    main()
