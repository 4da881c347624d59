"""``skidpad identify --kind track-width | odometry``: chassis geometry from logs.

``track-width LOG.csv``: the effective track from a spin-in-place log
(:func:`planners.identify_geometry.fit_track_width`). ``odometry LOG_OR_RUN_DIR``: the
UMBmark square test (Borenstein & Feng 1996; :func:`planners.odometry_calibration.umbmark_correction`)
from an ``umbmark.csv`` results file, a folder holding one, or robot logs of the squares
(:mod:`planners.umbmark_data`).

:data:`KINDS` maps each kind to its handler; ``sim.commands.identify`` merges it. A handler
takes the parsed arguments (``log``, ``json``, ``plot``; optional ``wheel_radius``) and
returns the exit code.
"""

from __future__ import annotations

import argparse
import json
import math

import numpy as np


def _plot_track(fit, path: str, title: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, (ax, res) = plt.subplots(2, 1, figsize=(7, 6), sharex=True, height_ratios=(3, 1))
    deg = np.degrees(fit.yaw)
    ax.plot(deg, fit.differential, ".", ms=2, label="log")
    ax.plot(deg, fit.track * fit.yaw, "-", lw=1, label=f"fit: b_eff = {fit.track:.4f} m")
    ax.set_ylabel("right - left wheel travel [m]")
    ax.set_title(title)
    ax.legend()
    res.plot(deg, 1e3 * (fit.differential - fit.track * fit.yaw), ".", ms=2)
    res.set_xlabel("IMU yaw change [deg]")
    res.set_ylabel("residual [mm]")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def track_width(args: argparse.Namespace) -> int:
    """Handler of ``identify --kind track-width LOG.csv``."""
    from planners.identify_geometry import fit_track_width
    from planners.robot_log import read_log

    log = read_log(args.log)
    fit = fit_track_width(log, wheel_radius=getattr(args, "wheel_radius", None))
    if getattr(args, "plot", None):
        _plot_track(fit, args.plot, f"track width from {args.log}")
    if args.json:
        print(json.dumps({"kind": "track-width", "log": args.log, **fit.as_dict()}))
        return 0
    print(f"effective track b_eff = {fit.track:.4f} m (SE {1e3 * fit.se:.2f} mm, R^2 {fit.r2:.6f}) "
          f"over {math.degrees(fit.turn):.0f} deg of turn, {fit.samples} samples, IMU {fit.yaw_source}")
    if fit.expansion is not None:
        print(f"  against the log's track {fit.nominal_track:.4f} m: expansion factor {fit.expansion:.3f}"
              + ("  (skid-steer wheels scrub: the effective track is the one to use)" if fit.expansion > 1.05 else ""))
    if fit.forward_ratio > 0.05:
        print(f"warning: the robot also travelled {100 * fit.forward_ratio:.0f} % of the differential "
              "distance forward or back; a clean spin in place gives a cleaner fit")
    print("  SE treats samples as independent; cumulative data make it a lower bound")
    if getattr(args, "plot", None):
        print(f"wrote {args.plot}")
    return 0


def _e_max(cw: np.ndarray, ccw: np.ndarray) -> float:
    # UMBmark's measure: the larger distance of the cw and ccw centres of gravity from the start
    return float(max(np.hypot(*np.mean(cw, axis=0)), np.hypot(*np.mean(ccw, axis=0))))


def _plot_errors(data, after, path: str, title: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6, 6))
    sets = [("before", data.cw, data.ccw, "o")] + ([("after", *after, "x")] if after else [])
    for label, cw, ccw, marker in sets:
        for name, e, colour in (("cw", cw, "tab:blue"), ("ccw", ccw, "tab:orange")):
            ax.plot(100 * e[:, 0], 100 * e[:, 1], marker, color=colour, alpha=0.6, label=f"{name} {label}")
            cx, cy = 100 * e.mean(axis=0)
            ax.plot(cx, cy, "+", color=colour, ms=14, mew=2)
    ax.axhline(0, color="0.7", lw=0.5)
    ax.axvline(0, color="0.7", lw=0.5)
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("end error x [cm] (start frame)")
    ax.set_ylabel("end error y [cm]")
    ax.set_title(title)
    ax.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def odometry(args: argparse.Namespace) -> int:
    """Handler of ``identify --kind odometry LOG_OR_RUN_DIR``."""
    from planners.identify_geometry import radius_scale
    from planners.odometry_calibration import umbmark_correction
    from planners.umbmark_data import load, log_errors
    from sim.cli import SAFETY

    data, corrected = load(args.log)
    c = umbmark_correction(data.cw, data.ccw, side=data.side, track=data.track)
    after, after_source = None, None
    if corrected is not None:
        after, after_source = (corrected.cw, corrected.ccw), corrected.source
    elif data.logs:
        cw, ccw, _ = log_errors(data.logs, scale=(c.left_scale, c.right_scale, c.track_scale))
        after, after_source = (cw, ccw), "the same runs, odometry recomputed with the corrected values"
    e_after = _e_max(*after) if after else None
    radii = None
    if data.wheel_radius is not None:
        radii = (data.wheel_radius[0] * c.left_scale, data.wheel_radius[1] * c.right_scale)
    keys = None
    if "track_scale" in data.meta or "radius_scale" in data.meta:
        old = radius_scale(data.source, data.meta)
        old_b = float(data.meta.get("track_scale", 1.0))  # already checked when the track was read
        keys = {"radius_scale": [old[0] * c.left_scale, old[1] * c.right_scale], "track_scale": old_b * c.track_scale}
    if getattr(args, "plot", None):
        _plot_errors(data, after, args.plot, f"UMBmark end errors, {data.side:g} m square")
    out = {
        "kind": "odometry", "source": data.source, "runs_cw": len(data.cw), "runs_ccw": len(data.ccw),
        "side_m": data.side, "nominal_track_m": data.track,
        "diameter_ratio": c.diameter_ratio, "track_scale": c.track_scale, "track_m": c.track,
        "left_scale": c.left_scale, "right_scale": c.right_scale,
        "wheel_radius_left_m": radii[0] if radii else None, "wheel_radius_right_m": radii[1] if radii else None,
        "alpha_rad": c.alpha, "beta_rad": c.beta,
        "e_max_syst_before_m": c.e_max_syst, "e_max_syst_after_m": e_after, "after_from": after_source,
        "scenario_keys": keys,
    }
    if args.json:
        print(json.dumps(out))
        return 0
    print(f"UMBmark: {len(data.cw)} cw and {len(data.ccw)} ccw runs of a {data.side:.3g} m square, "
          f"odometry track {data.track:.4f} m")
    print(f"  turn shortfall alpha {math.degrees(c.alpha):+.3f} deg per 90 deg turn, leg bend beta "
          f"{math.degrees(c.beta):+.3f} deg per leg")
    print(f"  wheel-diameter ratio E_d = D_R / D_L = {c.diameter_ratio:.5f}")
    print(f"  track scale E_b = {c.track_scale:.5f}: corrected track {c.track:.4f} m")
    if radii:
        print(f"  corrected wheel radii: left {radii[0]:.5f} m, right {radii[1]:.5f} m "
              f"(x {c.left_scale:.5f}, x {c.right_scale:.5f})")
    else:
        print(f"  corrected wheel diameters: left x {c.left_scale:.5f}, right x {c.right_scale:.5f}")
    print(f"  E_max,syst before: {100 * c.e_max_syst:.2f} cm")
    if e_after is not None:
        print(f"  E_max,syst after:  {100 * e_after:.2f} cm ({after_source}); "
              f"{c.e_max_syst / max(e_after, 1e-12):.1f}x smaller")
    else:
        print("  E_max,syst after: drive the squares again with the corrected values to measure it")
    if keys:
        print("  scenario keys: [sensors.encoders] radius_scale = "
              f"[{keys['radius_scale'][0]:.6f}, {keys['radius_scale'][1]:.6f}], track_scale = {keys['track_scale']:.6f}")
    if getattr(args, "plot", None):
        print(f"wrote {args.plot}")
    print(SAFETY)
    return 0


#: identify kinds handled here (merged into ``sim.commands.identify``)
KINDS = {"track-width": track_width, "odometry": odometry}
