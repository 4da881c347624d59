"""Odometry drift stress test: how far each odometry source believes the robot is from truth.

The scenario is run N times (its ``[run.vary]`` randomisation, one robot per run, all in one
World) under its own tracker and estimator; alongside, every odometry source the sensors
allow (``encoders``, ``encoders+imu``, ``pods``, ``pods+imu``) dead-reckons from the same
readings. Reported per source: final position error as % of distance travelled (mean, p95),
heading drift in degrees per minute, and the error growth against distance.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from planners.odometry import Odometry
from planners.odometry_geometry import assumed_forward_matrix
from planners.se2 import wrap
from sim.runner import Simulation
from sim.scenario import Scenario
from sim.trace import write_csv_rows

#: distance bins of the growth curve [m]
_BIN = 0.25


def odometry_sources(sim: Simulation) -> dict[str, Odometry]:
    """Every odometry source the scenario's sensors allow, built from its geometry."""
    s = sim.scenario.sensors
    out: dict[str, Odometry] = {}
    if s.encoders is not None:
        for src in ("encoders", "encoders+imu") if s.imu is not None else ("encoders",):
            forward = assumed_forward_matrix(
                sim.geom, radius_scale=s.encoders.radius_scale, track_scale=s.encoders.track_scale
            )
            out[src] = Odometry(source=src, forward=forward, counts_per_rev=s.encoders.counts_per_rev)
    if len(s.pods) >= 2:
        at = np.array([p.at for p in s.pods])
        kw = dict(
            pod_at=at, pod_direction=np.array([p.direction for p in s.pods]),
            pod_radius=np.array([p.radius for p in s.pods]),
            pod_counts_per_rev=np.array([p.counts_per_rev for p in s.pods]),
            no_sideslip=sim.scenario.robot.chassis != "mecanum" and len(s.pods) == 2,
        )
        for src in ("pods", "pods+imu") if s.imu is not None else ("pods",):
            if src == "pods" and len(s.pods) < 3 and not kw["no_sideslip"]:
                continue  # two pods cannot see heading on a strafing chassis without the IMU
            out[src] = Odometry(source=src, **kw)
    return out


def drift_test(scenario: Scenario, runs: int) -> dict:
    """Run the stress test; returns per-source figures and growth curves.

    Returns
    -------
    dict with ``rows`` (one dict per source: source, position_error_pct_mean,
    position_error_pct_p95, heading_drift_deg_per_min_mean, heading_drift_deg_per_min_p95,
    final_error_m_mean) and ``growth`` (source -> (distance bins, error per run (R, B)))
    """
    sim = Simulation(scenario, runs=range(runs))
    sources = odometry_sources(sim)
    if not sources:
        raise ValueError("drift: the scenario has no encoders or pods to dead-reckon from")
    pose0 = sim.world.pose.copy()
    for odo in sources.values():
        odo.reset(pose0)
    n = sim.n
    max_bins = int(math.ceil(60.0 / _BIN))
    growth = {k: np.full((n, max_bins), np.nan) for k in sources}
    dist = np.zeros(n)
    last = pose0[:, :2].copy()
    final = {k: np.zeros((n, 3)) for k in sources}
    end_t = np.zeros(n)
    end_dist = np.zeros(n)
    truth_end = pose0.copy()
    while True:
        active = sim.active.copy()
        if not active.any():
            break
        sim.step()
        pose = sim.world.pose
        dist += active * np.hypot(*(pose[:, :2] - last).T)
        last = pose[:, :2].copy()
        b = np.minimum((dist / _BIN).astype(int), max_bins - 1)
        for key, odo in sources.items():
            est = odo.update(sim.readings)
            err = np.hypot(*(est[:, :2] - pose[:, :2]).T)
            rows = np.flatnonzero(active)
            growth[key][rows, b[rows]] = err[rows]
            final[key][active] = est[active]
        truth_end[active] = pose[active]
        end_t[active] = sim.t
        end_dist[active] = dist[active]
    out_rows = []
    for key in sources:
        pos = 100.0 * np.hypot(*(final[key][:, :2] - truth_end[:, :2]).T) / np.maximum(end_dist, 1e-9)
        head = np.degrees(np.abs(wrap(final[key][:, 2] - truth_end[:, 2]))) / np.maximum(end_t / 60.0, 1e-9)
        out_rows.append({
            "source": key,
            "position_error_pct_mean": float(np.mean(pos)),
            "position_error_pct_p95": float(np.percentile(pos, 95)),
            "heading_drift_deg_per_min_mean": float(np.mean(head)),
            "heading_drift_deg_per_min_p95": float(np.percentile(head, 95)),
            "final_error_m_mean": float(np.mean(pos * end_dist / 100.0)),
            "runs": n,
        })
    bins = (np.arange(max_bins) + 0.5) * _BIN
    return {"rows": out_rows, "growth": {k: (bins, v) for k, v in growth.items()}, "distance_m": end_dist}


def write_drift(result: dict, out: str | os.PathLike, *, title: str = "") -> None:
    """DIR/drift.csv (one row per source) and DIR/drift.png (error growth with spread)."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    header = list(result["rows"][0])
    write_csv_rows(out / "drift.csv", header, [[r[h] for h in header] for r in result["rows"]])
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(8, 5))
    colours = ["#0072B2", "#E69F00", "#009E73", "#CC79A7"]
    for colour, (key, (bins, err)) in zip(colours, result["growth"].items()):
        keep = np.any(np.isfinite(err), axis=0)
        with np.errstate(all="ignore"):
            med = np.nanmedian(err[:, keep], axis=0) * 100
            lo = np.nanpercentile(err[:, keep], 5, axis=0) * 100
            hi = np.nanpercentile(err[:, keep], 95, axis=0) * 100
        ax.plot(bins[keep], med, color=colour, label=f"{key} (median)")
        ax.fill_between(bins[keep], lo, hi, color=colour, alpha=0.2)
    ax.set_xlabel("distance travelled [m]")
    ax.set_ylabel("position error [cm] (band: 5-95 % of runs)")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend()
    fig.tight_layout()
    fig.savefig(out / "drift.png", dpi=110)
    plt.close(fig)
