"""One module per ``skidpad`` sub-command; each has ``add_parser(subparsers)``."""

from __future__ import annotations

import argparse


def add_set_option(p: argparse.ArgumentParser) -> None:
    """The ``--set key=value`` option shared by commands that load a scenario."""
    p.add_argument(
        "--set",
        dest="overrides",
        action="append",
        default=[],
        metavar="KEY=VALUE",
        help='override a scenario key, e.g. --set tracker.lookahead="0.3 m" (repeatable)',
    )
