"""Write a simulated run as a robot log (the CSV format of :mod:`planners.robot_log`).

The log holds what the robot itself could have logged (duty, battery, encoder counts, IMU,
pods, fixes, the plan reference) plus the simulator's ground truth, so users can rehearse
identification and replay on logs whose right answer is known.

Differential and skid chassis are logged per side (the mean of that side's wheels, as one
encoder on each gearbox would see); mecanum per wheel.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from planners.readings import Readings
from planners.log_writer import write_log
from planners.robot_log import WHEEL_LABELS
from sim.runner import Simulation


class LogRecorder:
    """Collect one robot's readings tick by tick while a :class:`Simulation` steps.

    Parameters
    ----------
    sim : Simulation — the simulation (its first robot is logged)
    """

    def __init__(self, sim: Simulation) -> None:
        self.sim = sim
        self.kind = sim.geom.kind
        self.rows: list[dict[str, np.ndarray | float]] = []
        self._yaw = 0.0

    def _per_label(self, values: np.ndarray) -> np.ndarray:
        """(W,) per wheel -> per label: mecanum as is, others the mean of each side."""
        if self.kind == "mecanum":
            return values
        half = values.shape[0] // 2
        return np.array([values[:half].mean(), values[half:].mean()])

    def capture(self, readings: Readings, duty: np.ndarray, pose: np.ndarray, reference: np.ndarray) -> None:
        """Store tick data of robot 0: readings at the tick, duty applied from it, true pose."""
        row: dict[str, np.ndarray | float] = {
            "t": readings.t,
            "duty": self._per_label(duty[0]),
            "battery": float(readings.battery_voltage[0]),
            "true": pose[0].copy(),
            "ref": reference.copy(),
        }
        if readings.encoder_counts is not None:
            row["counts"] = self._per_label(readings.encoder_counts[0])
        if readings.gyro_rate is not None:
            valid = bool(readings.imu_valid[0])
            rate = float(readings.gyro_rate[0]) if valid else math.nan
            if valid:
                self._yaw += rate * float(readings.gyro_interval[0])
            row["yaw_rate"] = rate
            row["yaw"] = self._yaw if valid else math.nan
        if readings.pod_counts is not None:
            row["pods"] = readings.pod_counts[0].copy()
        if readings.fix is not None:
            row["fix"] = readings.fix[0].copy() if bool(readings.fix_valid[0]) else np.full(3, np.nan)
        self.rows.append(row)

    def columns(self) -> dict[str, tuple[str, np.ndarray]]:
        """Log columns: name -> (unit, values)."""
        labels = WHEEL_LABELS["mecanum" if self.kind == "mecanum" else "sides"]
        stack = lambda key: np.array([r[key] for r in self.rows])
        cols: dict[str, tuple[str, np.ndarray]] = {}
        duty = stack("duty")
        for j, w in enumerate(labels):
            cols[f"duty_{w}"] = ("1", duty[:, j])
        cols["battery"] = ("V", stack("battery"))
        first = self.rows[0]
        if "counts" in first:
            counts = stack("counts")
            for j, w in enumerate(labels):
                cols[f"position_{w}"] = ("counts", counts[:, j])
        if "yaw_rate" in first:
            cols["yaw_rate"] = ("rad/s", stack("yaw_rate"))
            cols["yaw"] = ("rad", stack("yaw"))
        if "pods" in first:
            pods = self.sim.scenario.sensors.pods
            counts = stack("pods")
            for i, pod in enumerate(pods):
                cols[f"pod_{i}"] = ("m", counts[:, i] * (2.0 * math.pi * pod.radius / pod.counts_per_rev))
        if "fix" in first:
            fix = stack("fix")
            for j, p in enumerate(("x", "y", "heading")):
                cols[f"fix_{p}"] = ("m" if j < 2 else "rad", fix[:, j])
        for prefix in ("ref", "true"):
            pose = stack(prefix)
            for j, p in enumerate(("x", "y", "heading")):
                cols[f"{prefix}_{p}"] = ("m" if j < 2 else "rad", pose[:, j])
        return cols

    def write(self, path: str | os.PathLike) -> Path:
        """Write the log CSV (with ``counts_per_rev`` and the scenario as metadata)."""
        sc = self.sim.scenario
        meta: dict[str, object] = {"chassis": self.kind, "scenario": sc.title, "seed": sc.run.seed,
                                   "run": int(self.sim.runs[0])}
        if sc.sensors.encoders is not None:
            meta["counts_per_rev"] = f"{sc.sensors.encoders.counts_per_rev:g}"
        r = sc.robot
        meta.update(wheel_radius=f"{r.wheel_radius:g}", track=f"{r.track:g}", wheelbase=f"{r.wheelbase:g}")
        enc = sc.sensors.encoders
        if enc is not None and (tuple(enc.radius_scale), enc.track_scale) != ((1.0, 1.0), 1.0):
            # the geometry the robot's odometry assumes (planners.odometry_geometry)
            meta.update(radius_scale=", ".join(f"{v:.9g}" for v in enc.radius_scale),
                        track_scale=f"{enc.track_scale:.9g}")
        if sc.sensors.imu is not None:
            meta["gyro_rate_noise"] = f"{sc.sensors.imu.rate_noise:g}"
        if sc.sensors.fixes is not None:
            fx = sc.sensors.fixes
            meta.update(fix_sigma_xy=f"{fx.sigma_xy:g}", fix_sigma_heading=f"{fx.sigma_heading:g}",
                        fix_latency=f"{fx.latency:g}")
        comment = (
            "skidpad simulated robot log: columns before true_* are what the robot logs itself;\n"
            "true_* is the simulator's ground truth."
        )
        t = np.array([r["t"] for r in self.rows])
        return write_log(path, t, self.columns(), meta=meta, comment=comment)


def run_logged(sim: Simulation) -> LogRecorder:
    """Step ``sim`` to the end, capturing its first robot's log at every tick."""
    rec = LogRecorder(sim)
    while True:
        k = sim.k
        pose = sim.world.pose.copy()
        more = sim.step()
        if sim.k > k:
            ref = sim.plan.pose[min(k, len(sim.plan.t) - 1)]
            rec.capture(sim.readings, sim.duty, pose, ref)
        if not more:
            return rec
