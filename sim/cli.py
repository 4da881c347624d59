"""The ``skidpad`` command: argument parsing and dispatch.

Every input error (:class:`~planners.errors.SkidpadError`) is printed as one line on stderr
with exit code 2; a traceback means a bug in skidpad. Each sub-command lives in its own
module under :mod:`sim.commands` and registers its parser here.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from planners.errors import SkidpadError

SAFETY = (
    "Caution: a simulated result does not make a real robot safe. Try new gains and routes "
    "at reduced speed, in a clear area, with a stop within reach, and follow the safety rules "
    "of your site or event."
)

COMMANDS = ("run", "batch", "drift", "view", "plan", "check", "identify", "gains", "tune", "envelope", "replay", "bench")


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser (each sub-command adds its own options)."""
    import importlib

    parser = argparse.ArgumentParser(
        prog="skidpad",
        description=(
            "Drive a simulated mecanum, skid-steer or differential robot along a scripted "
            "route under a chosen tracker and estimator, and score the result."
        ),
        epilog=SAFETY,
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"sim.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"sim.commands.{name}":
                raise
            continue
        module.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``skidpad`` console script; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return 0
    try:
        return int(args.handler(args) or 0)
    except SkidpadError as exc:
        print(f"skidpad {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"skidpad {args.command}: interrupted; finished results are on disk", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
