"""``skidpad bench [WHAT...]``: speed figures (physics, sensors, loop, estimators, batch, viewer)."""

from __future__ import annotations

import argparse
import importlib
import json
import os
import platform

SUITES = {
    "physics": ("sim.bench_physics", "bench_physics"),
    "sensors": ("sim.bench_sensors", "bench_sensors"),
    "loop": ("sim.bench_loop", "bench_loop"),
    "estimators": ("sim.bench_estimators", "bench_estimators"),
    "batch": ("sim.bench_batch", "bench_batch"),
    "tune": ("sim.bench_tune", "bench_tune"),
    "viewer": ("sim.viewer.bench", "bench_viewer"),
}


def add_parser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "bench",
        help="measure speed (robot-substeps/s, real-time factors, batch wall time)",
        description="Run the speed benchmarks. Figures depend on the machine and its load.",
    )
    p.add_argument("what", nargs="*", choices=[*SUITES, []], metavar="WHAT",
                   help=f"which benchmarks ({', '.join(SUITES)}; default: all)")
    p.add_argument("--json", action="store_true", help="print every figure as one JSON object")
    p.add_argument("--quick", action="store_true", help="smaller sizes, for a fast look")
    p.set_defaults(handler=run)


def _flat(d: dict, prefix: str = "") -> dict:
    out = {}
    for k, v in d.items():
        key = f"{prefix}{k}".replace("=", "").replace(" ", "_")
        if isinstance(v, dict):
            out.update(_flat(v, f"{key}_"))
        else:
            out[key] = v
    return out


def run(args: argparse.Namespace) -> int:
    figures: dict = {
        "machine": f"{platform.machine()} {os.cpu_count()} cores, load {os.getloadavg()[0]:.2f}",
    }
    for name in args.what or list(SUITES):
        module, func = SUITES[name]
        try:
            fn = getattr(importlib.import_module(module), func)
        except (ModuleNotFoundError, AttributeError) as exc:
            figures[f"{name}_skipped"] = str(exc)
            continue
        kw = {"quick": True} if args.quick and "quick" in fn.__code__.co_varnames else {}
        result = _flat(fn(**kw))
        if name == "physics":
            result = {f"physics_substeps_per_s_{k}": v for k, v in result.items()}
        figures.update(result)
        if not args.json:
            for key, value in result.items():
                shown = f"{value:,.0f}" if isinstance(value, (int, float)) and abs(value) >= 100 else value
                if isinstance(shown, float):
                    shown = f"{shown:.3g}"
                print(f"{key:>44}: {shown}")
    if args.json:
        print(json.dumps(figures))
    return 0
