"""Drive the UMBmark squares in the simulator and write their end errors as ``umbmark.csv``.

Borenstein & Feng 1996: the robot drives an L x L square by its odometry, n times
clockwise and n times counter-clockwise; the end error (true end minus odometry end, in
the start frame) of each run goes into the results file :mod:`planners.umbmark_data`
reads, ready for ``skidpad identify --kind odometry DIR``. With ``correct=True`` the
squares are driven again with the odometry geometry the test recovered
(``[sensors.encoders] radius_scale`` and ``track_scale`` rescaled), into
``umbmark-corrected.csv``.

Run as ``python -m sim.umbmark --runs 5 --out DIR`` (the bundled
``scenarios/umbmark-cw.toml`` and ``umbmark-ccw.toml`` by default).
"""

from __future__ import annotations

import argparse
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from planners.errors import ScenarioError
from planners.odometry_calibration import UmbmarkCorrection, umbmark_correction
from planners.umbmark_data import CORRECTED, RESULTS, write_results
from sim.runner import Simulation
from sim.scenario import Scenario, bundled_dir, load_scenario


def end_errors(scenario: Scenario, runs: int) -> np.ndarray:
    """End errors (runs, 2) [m] of ``runs`` runs: true minus encoder odometry, start frame.

    Raises
    ------
    ScenarioError — the scenario has no encoders, or a run diverged or collided
    """
    if scenario.sensors.encoders is None:
        raise ScenarioError(f"{scenario.source}: sensors.encoders must be present for UMBmark, got none")
    sim = Simulation(scenario, runs=range(runs))
    results = sim.run()
    bad = [r for r in results if r.scorecard["status"] in ("diverged", "collided")]
    if bad:
        raise ScenarioError(f"{scenario.source}: UMBmark run {bad[0].run} ended "
                            f"{bad[0].scorecard['status']}; the square must be driven to its end")
    return finished_errors(sim)


def finished_errors(sim: Simulation) -> np.ndarray:
    """End errors (N, 2) [m] of a finished simulation: true minus encoder odometry, start frame."""
    h0 = sim.scenario.route.start[2]
    d = sim.final_true[:, :2] - sim.final_odometry[:, :2]
    c, s = np.cos(h0), np.sin(h0)
    return np.column_stack([c * d[:, 0] + s * d[:, 1], -s * d[:, 0] + c * d[:, 1]])


def square_side(scenario: Scenario) -> float:
    """Side of the route's square [m]: mean x and y extent of its start and waypoints."""
    pts = np.array([scenario.route.start[:2], *[w.at for w in scenario.route.waypoints]])
    return float(0.5 * (np.ptp(pts[:, 0]) + np.ptp(pts[:, 1])))


def _meta(scenario: Scenario) -> dict[str, object]:
    enc, r = scenario.sensors.encoders, scenario.robot
    return {
        "side": f"{square_side(scenario):.6g}", "track": f"{r.track * enc.track_scale:.9g}",
        "wheel_radius": f"{r.wheel_radius:.9g}",
        "radius_scale": ", ".join(f"{v:.9g}" for v in enc.radius_scale),
        "track_scale": f"{enc.track_scale:.9g}", "chassis": r.chassis, "scenario": scenario.title,
    }


def corrected_overrides(scenario: Scenario, c: UmbmarkCorrection) -> list[str]:
    """``--set`` strings that give the scenario's odometry the recovered geometry."""
    enc = scenario.sensors.encoders
    left, right = enc.radius_scale[0] * c.left_scale, enc.radius_scale[1] * c.right_scale
    return [f"sensors.encoders.radius_scale=[{left:.9g}, {right:.9g}]",
            f"sensors.encoders.track_scale={enc.track_scale * c.track_scale:.9g}"]


def simulate_umbmark(
    out: str | os.PathLike,
    *,
    cw: str | os.PathLike | None = None,
    ccw: str | os.PathLike | None = None,
    runs: int = 5,
    overrides: Sequence[str] = (),
    correct: bool = False,
) -> dict:
    """Drive both squares ``runs`` times, write ``out/umbmark.csv`` (and the corrected reruns).

    Returns
    -------
    dict with ``before`` (cw, ccw errors), ``correction`` (UmbmarkCorrection), ``after``
    (cw, ccw errors or None), ``paths`` (files written)
    """
    paths = [Path(cw or bundled_dir("scenarios") / "umbmark-cw.toml"),
             Path(ccw or bundled_dir("scenarios") / "umbmark-ccw.toml")]
    scenarios = [load_scenario(p, list(overrides)) for p in paths]
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    before = [end_errors(sc, runs) for sc in scenarios]
    meta = _meta(scenarios[0])
    written = [write_results(out / RESULTS, *before, meta=meta)]
    c = umbmark_correction(*before, side=float(meta["side"]), track=float(meta["track"]))
    after = None
    if correct:
        fixed = [load_scenario(p, [*overrides, *corrected_overrides(sc, c)]) for p, sc in zip(paths, scenarios)]
        after = [end_errors(sc, runs) for sc in fixed]
        written.append(write_results(out / CORRECTED, *after, meta=_meta(fixed[0])))
    return {"before": before, "correction": c, "after": after, "paths": written}


def main(argv: Sequence[str] | None = None) -> int:
    """``python -m sim.umbmark``: simulate the squares into a results folder."""
    p = argparse.ArgumentParser(prog="python -m sim.umbmark", description=__doc__.split("\n\n")[0])
    p.add_argument("--cw", help="clockwise square scenario (default: bundled umbmark-cw.toml)")
    p.add_argument("--ccw", help="counter-clockwise square scenario (default: bundled umbmark-ccw.toml)")
    p.add_argument("--runs", type=int, default=5, help="runs per direction (default 5)")
    p.add_argument("--out", default="skidpad-out/umbmark", help="results folder")
    p.add_argument("--correct", action="store_true", help="also rerun with the recovered geometry")
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE")
    args = p.parse_args(argv)
    result = simulate_umbmark(args.out, cw=args.cw, ccw=args.ccw, runs=args.runs,
                              overrides=args.overrides, correct=args.correct)
    print("wrote " + ", ".join(str(q) for q in result["paths"]))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
