"""Human output: compact terminal tables of scorecards and summaries (rich)."""

from __future__ import annotations

import math
import re

from rich.console import Console
from rich.table import Table

from sim.units import UNITS

def show(key: str, value: object, units: str = "m") -> str:
    """A scorecard value in human units: lengths in cm (or in), angles in degrees."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    if key.endswith("_m"):
        if units == "in":
            return f"{value / UNITS['length']['in']:.2f} in"
        return f"{100 * value:.2f} cm" if abs(value) < 1 else f"{value:.3f} m"
    if key.endswith("_rad"):
        return f"{math.degrees(value):.2f} deg"
    if key.endswith("_pct"):
        return f"{value:.2f} %"
    if key.endswith("_s"):
        return f"{value:.2f} s"
    if key.endswith("_v"):
        return f"{value:.2f} V"
    if key.endswith("_a"):
        return f"{value:.1f} A"
    if key.endswith("_j"):
        return f"{value:.2f} J"
    if key.endswith("_fraction"):
        return f"{100 * value:.1f} %"
    return f"{value:g}"


SUMMARY_KEYS = (
    "status", "duration_s", "cross_track_rms_m", "cross_track_max_m", "end_position_error_m",
    "end_heading_error_rad", "estimate_error_rms_m", "collisions", "distance_travelled_m",
    "odometry_drift_pct", "peak_current_a", "min_battery_v",
)


def print_scorecard(card: dict, *, units: str = "m", console: Console | None = None) -> None:
    """Print one run's key figures as a two-column table."""
    console = console or Console()
    table = Table(title=f"{card.get('scenario', '')}  seed {card.get('seed')}  run {card.get('run')}",
                  show_header=False, title_justify="left")
    table.add_column("figure", style="bold")
    table.add_column("value", justify="right")
    for key in SUMMARY_KEYS:
        if key in card and card[key] != "":
            label = re.sub(r"_(m|rad|s|pct|v|a|j)$", "", key).replace("_", " ")
            table.add_row(label, show(key, card[key], units))
    console.print(table)
