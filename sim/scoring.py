"""Scorecards: a run's figures, kept online tick by tick for N robots at once.

:class:`ScoreKeeper` accumulates sums and extremes as the runner steps, so a batch holds no
full traces. Cross-track error is measured from the true pose to the plan's path with the
progress-respecting projection (:func:`planners.plan.project`).

Keys are SI and listed in :data:`SCORE_KEYS` (documented in the README).
"""

from __future__ import annotations

import math

import numpy as np

from planners.plan import Plan, project
from planners.se2 import wrap

STATUSES = ("running", "completed", "timeout", "diverged", "collided", "failed")

#: key -> meaning, in the order of results.csv columns
SCORE_KEYS: dict[str, str] = {
    "status": "completed | timeout | diverged | collided | failed",
    "completed": "true when the run reached the end pose within tolerance and settled",
    "status_time_s": "time the status was decided [s]",
    "status_cause": "why the run ended, in words",
    "duration_s": "time from start to the end of the run [s]",
    "cross_track_rms_m": "RMS distance of the true pose from the path [m]",
    "cross_track_max_m": "largest distance from the path [m]",
    "cross_track_p95_m": "95th percentile of the distance from the path [m]",
    "along_track_lag_rms_m": "RMS of (planned arc length - projected arc length) [m]",
    "heading_rms_rad": "RMS heading error against the plan reference [rad]",
    "end_position_error_m": "distance of the final true pose from the route's final pose [m]",
    "end_heading_error_rad": "heading error of the final true pose [rad]",
    "collisions": "number of new contacts with walls or obstacles",
    "peak_penetration_m": "deepest contact penetration [m]",
    "estimate_error_rms_m": "RMS position error of the estimate against truth [m]",
    "estimate_error_max_m": "largest position error of the estimate [m]",
    "nees_mean": "mean normalised estimation error squared (empty without a covariance)",
    "distance_travelled_m": "length of the true path driven [m]",
    "odometry_drift_pct": "final encoder-odometry position error as % of distance travelled",
    "slip_energy_j": "energy dissipated by wheel slip [J]",
    "saturated_fraction": "fraction of ticks any wheel's duty was at +-1",
    "peak_current_a": "largest motor current [A]",
    "min_battery_v": "lowest battery terminal voltage [V]",
    "final_pose_true": "final true pose [x, y, heading]",
    "final_pose_estimated": "final estimated pose [x, y, heading]",
}


class ScoreKeeper:
    """Online figures of N robots following one plan.

    Parameters
    ----------
    plan : Plan
    n : int — robots
    max_ticks : int — capacity of the per-tick cross-track store (for the p95)
    """

    def __init__(self, plan: Plan, n: int, max_ticks: int):
        self.plan = plan
        self.n = n
        z = np.zeros(n)
        self.s = np.zeros(n)
        self.ticks = np.zeros(n, dtype=np.int64)
        self.xt_sq, self.xt_max, self.lag_sq, self.head_sq = z.copy(), z.copy(), z.copy(), z.copy()
        self.est_sq, self.est_max, self.nees_sum = z.copy(), z.copy(), z.copy()
        self.nees_count = np.zeros(n, dtype=np.int64)
        self.distance, self.saturated = z.copy(), z.copy()
        self.peak_current, self.min_battery = z.copy(), np.full(n, np.inf)
        self.xt_abs = np.zeros((max_ticks, n), dtype=np.float32)
        self.last_xy: np.ndarray | None = None
        self.cross_track = z.copy()

    def update(
        self,
        k: int,
        t: float,
        active: np.ndarray,
        pose: np.ndarray,
        estimate: np.ndarray,
        covariance: np.ndarray | None,
        duty: np.ndarray,
        current: np.ndarray,
        battery: np.ndarray,
    ) -> None:
        """Fold in tick ``k`` for the robots where ``active`` (N,) is true."""
        s, d = project(self.plan, pose[:, :2], self.s)
        self.s = np.where(active, s, self.s)
        self.cross_track = d
        tick = min(int(round(t / self.plan.dt)), len(self.plan.t) - 1)
        ref_heading = self.plan.pose[tick, 2]
        plan_s = self.plan.s[tick]
        a = active.astype(np.float64)
        self.ticks += active
        self.xt_sq += a * d * d
        self.xt_max = np.where(active, np.maximum(self.xt_max, np.abs(d)), self.xt_max)
        if k < self.xt_abs.shape[0]:
            self.xt_abs[k] = np.where(active, np.abs(d), np.nan)
        self.lag_sq += a * (plan_s - s) ** 2
        self.head_sq += a * wrap(pose[:, 2] - ref_heading) ** 2
        err = estimate[:, :2] - pose[:, :2]
        e2 = np.einsum("ij,ij->i", err, err)
        self.est_sq += a * e2
        self.est_max = np.where(active, np.maximum(self.est_max, np.sqrt(e2)), self.est_max)
        if covariance is not None:
            full = estimate - pose
            full[:, 2] = wrap(full[:, 2])
            ok = active & np.all(np.isfinite(covariance.reshape(self.n, -1)), axis=1)
            if ok.any():
                cov, e = covariance[ok], full[ok]
                try:
                    sol = np.linalg.solve(cov, e[:, :, None])[:, :, 0]
                except np.linalg.LinAlgError:
                    # pseudo-inverse: a singular covariance (a collapsed particle cloud) must not crash
                    sol = np.einsum("nij,nj->ni", np.linalg.pinv(cov), e)
                self.nees_sum[ok] += np.einsum("ij,ij->i", e, sol)
                self.nees_count[ok] += 1
        if self.last_xy is not None:
            step = np.hypot(*(pose[:, :2] - self.last_xy).T)
            self.distance += a * step
        self.last_xy = pose[:, :2].copy()
        self.saturated += a * np.any(np.abs(duty) >= 1.0 - 1e-9, axis=1)
        self.peak_current = np.where(active, np.maximum(self.peak_current, np.max(np.abs(current), axis=1)), self.peak_current)
        self.min_battery = np.where(active, np.minimum(self.min_battery, battery), self.min_battery)

    def scorecards(
        self,
        *,
        status: list[str],
        status_time: np.ndarray,
        cause: list[str],
        final_true: np.ndarray,
        final_estimate: np.ndarray,
        collisions: np.ndarray,
        penetration: np.ndarray,
        slip_energy: np.ndarray,
        odometry_final: np.ndarray | None,
    ) -> list[dict]:
        """One scorecard dict per robot (keys of :data:`SCORE_KEYS`)."""
        goal = self.plan.final_pose[0]
        cards = []
        for i in range(self.n):
            m = max(int(self.ticks[i]), 1)
            xt = self.xt_abs[:, i]
            xt = xt[np.isfinite(xt)]
            dist = float(self.distance[i])
            drift = ""
            if odometry_final is not None and dist > 0.05:
                drift = 100.0 * float(np.hypot(*(odometry_final[i, :2] - final_true[i, :2]))) / dist
            cards.append(
                {
                    "status": status[i],
                    "completed": status[i] == "completed",
                    "status_time_s": float(status_time[i]),
                    "status_cause": cause[i],
                    "duration_s": float(status_time[i]),
                    "cross_track_rms_m": math.sqrt(self.xt_sq[i] / m),
                    "cross_track_max_m": float(self.xt_max[i]),
                    "cross_track_p95_m": float(np.percentile(xt, 95)) if xt.size else 0.0,
                    "along_track_lag_rms_m": math.sqrt(self.lag_sq[i] / m),
                    "heading_rms_rad": math.sqrt(self.head_sq[i] / m),
                    "end_position_error_m": float(np.hypot(*(final_true[i, :2] - goal[:2]))),
                    "end_heading_error_rad": float(abs(wrap(final_true[i, 2] - goal[2]))),
                    "collisions": int(collisions[i]),
                    "peak_penetration_m": float(penetration[i]),
                    "estimate_error_rms_m": math.sqrt(self.est_sq[i] / m),
                    "estimate_error_max_m": float(self.est_max[i]),
                    "nees_mean": float(self.nees_sum[i] / self.nees_count[i]) if self.nees_count[i] else "",
                    "distance_travelled_m": dist,
                    "odometry_drift_pct": drift,
                    "slip_energy_j": float(slip_energy[i]),
                    "saturated_fraction": float(self.saturated[i] / m),
                    "peak_current_a": float(self.peak_current[i]),
                    "min_battery_v": float(self.min_battery[i]) if np.isfinite(self.min_battery[i]) else "",
                    "final_pose_true": [float(v) for v in final_true[i]],
                    "final_pose_estimated": [float(v) for v in final_estimate[i]],
                }
            )
        return cards
