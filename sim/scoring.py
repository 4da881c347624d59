"""Scorecards: a run's figures, kept online tick by tick for N robots at once.

:class:`ScoreKeeper` accumulates sums and extremes as the runner steps, so a batch holds no
full traces. Cross-track error is measured from the true pose to the plan's path with the
progress-respecting projection (:func:`planners.plan.project`).

Keys are SI and listed in :data:`SCORE_KEYS` (documented in the README).
"""

from __future__ import annotations

import math

import numpy as np

from numba import njit

from planners.plan import Plan, project_one
from planners.se2 import wrap, wrap_one

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


_NO_COVARIANCE = np.full((0, 3, 3), np.nan)


@njit(cache=True)
def _nees(cov, e0, e1, e2):
    """e' P^-1 e for one 3x3 covariance (Cramer's rule); pseudo-inverse when P is singular
    (a collapsed particle cloud must not crash); NaN when P is not finite."""
    for a in range(3):
        for b in range(3):
            if not np.isfinite(cov[a, b]):
                return np.nan
    a00, a01, a02 = cov[0, 0], cov[0, 1], cov[0, 2]
    a10, a11, a12 = cov[1, 0], cov[1, 1], cov[1, 2]
    a20, a21, a22 = cov[2, 0], cov[2, 1], cov[2, 2]
    c00 = a11 * a22 - a12 * a21
    c01 = a12 * a20 - a10 * a22
    c02 = a10 * a21 - a11 * a20
    det = a00 * c00 + a01 * c01 + a02 * c02
    scale = abs(a00 * a11 * a22) + 1e-300
    if abs(det) > 1e-12 * scale:
        inv = np.empty((3, 3))
        inv[0, 0], inv[1, 0], inv[2, 0] = c00 / det, c01 / det, c02 / det
        inv[0, 1] = (a02 * a21 - a01 * a22) / det
        inv[1, 1] = (a00 * a22 - a02 * a20) / det
        inv[2, 1] = (a01 * a20 - a00 * a21) / det
        inv[0, 2] = (a01 * a12 - a02 * a11) / det
        inv[1, 2] = (a02 * a10 - a00 * a12) / det
        inv[2, 2] = (a00 * a11 - a01 * a10) / det
    else:
        inv = np.linalg.pinv(cov)
    e = (e0, e1, e2)
    total = 0.0
    for a in range(3):
        for b in range(3):
            total += e[a] * inv[a, b] * e[b]
    return total


#: rows of the ScoreKeeper's accumulator block (K, N)
_ROWS = (
    "s", "ticks", "xt_sq", "xt_max", "lag_sq", "head_sq", "est_sq", "est_max", "nees_sum",
    "nees_count", "distance", "saturated", "peak_current", "min_battery", "last_x", "last_y",
    "cross_track",
)
(
    _S, _TICKS, _XT_SQ, _XT_MAX, _LAG_SQ, _HEAD_SQ, _EST_SQ, _EST_MAX, _NEES_SUM, _NEES_COUNT,
    _DIST, _SAT, _PEAK_I, _MIN_VB, _LAST_X, _LAST_Y, _CROSS,
) = range(len(_ROWS))


@njit(cache=True)
def _score_kernel(
    active, pose, estimate, covariance, duty, current, battery, path, ref_heading, plan_s,
    have_last, ahead, acc, store,
):
    n, w = duty.shape
    has_cov = covariance.shape[0] == n
    for i in range(n):
        if not active[i]:
            store[i] = np.nan
            acc[_LAST_X, i] = pose[i, 0]
            acc[_LAST_Y, i] = pose[i, 1]
            continue
        # progress-respecting projection of the true pose onto the path (planners.plan.project)
        s, d = project_one(path, pose[i, 0], pose[i, 1], acc[_S, i], 0.05, ahead)
        acc[_CROSS, i] = d
        acc[_S, i] = s
        ad = abs(d)
        acc[_TICKS, i] += 1.0
        acc[_XT_SQ, i] += d * d
        acc[_XT_MAX, i] = max(acc[_XT_MAX, i], ad)
        store[i] = ad
        acc[_LAG_SQ, i] += (plan_s - s) ** 2
        dh = wrap_one(pose[i, 2] - ref_heading)
        acc[_HEAD_SQ, i] += dh * dh
        ex = estimate[i, 0] - pose[i, 0]
        ey = estimate[i, 1] - pose[i, 1]
        e2 = ex * ex + ey * ey
        acc[_EST_SQ, i] += e2
        acc[_EST_MAX, i] = max(acc[_EST_MAX, i], math.sqrt(e2))
        if has_cov:
            eh = wrap_one(estimate[i, 2] - pose[i, 2])
            q = _nees(covariance[i], ex, ey, eh)
            if np.isfinite(q):
                acc[_NEES_SUM, i] += q
                acc[_NEES_COUNT, i] += 1.0
        if have_last:
            dx = pose[i, 0] - acc[_LAST_X, i]
            dy = pose[i, 1] - acc[_LAST_Y, i]
            acc[_DIST, i] += math.sqrt(dx * dx + dy * dy)
        acc[_LAST_X, i] = pose[i, 0]
        acc[_LAST_Y, i] = pose[i, 1]
        sat = False
        peak = 0.0
        for j in range(w):
            if abs(duty[i, j]) >= 1.0 - 1e-9:
                sat = True
        for j in range(current.shape[1]):
            peak = max(peak, abs(current[i, j]))
        if sat:
            acc[_SAT, i] += 1.0
        acc[_PEAK_I, i] = max(acc[_PEAK_I, i], peak)
        acc[_MIN_VB, i] = min(acc[_MIN_VB, i], battery[i])


class ScoreKeeper:
    """Online figures of N robots following one plan.

    Parameters
    ----------
    plan : Plan
    n : int — robots
    max_ticks : int — capacity of the per-tick cross-track store (for the p95)

    The running sums and extremes are rows of one (K, N) block (``_ROWS``), each also an
    attribute of its name (``xt_sq``, ``distance``, ...; counts are held as floats).
    """

    def __init__(self, plan: Plan, n: int, max_ticks: int):
        self.plan = plan
        self.n = n
        self._acc = np.zeros((len(_ROWS), n))
        self._acc[_MIN_VB] = np.inf
        for name, row in zip(_ROWS, self._acc):
            setattr(self, name, row)
        self._path = plan.segments
        self.xt_abs = np.zeros((max_ticks, n), dtype=np.float32)
        self._spare = np.empty(n, dtype=np.float32)
        self._have_last = False
        # the projection's look-ahead window: four ticks at twice the plan's top speed (the
        # robot's progress in one tick is far less), at least 5 cm, at most 20 cm
        top = float(np.max(np.hypot(plan.velocity[:, 0], plan.velocity[:, 1]), initial=0.0))
        self._ahead = min(0.2, max(0.05, 8.0 * top * plan.dt))

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
        plan = self.plan
        tick = min(int(t / plan.dt + 0.5), len(plan.t) - 1)
        store = self.xt_abs[k] if k < self.xt_abs.shape[0] else self._spare
        _score_kernel(
            active, pose, estimate, _NO_COVARIANCE if covariance is None else covariance, duty,
            current, battery, self._path, float(plan.pose[tick, 2]), float(plan.s[tick]),
            self._have_last, self._ahead, self._acc, store,
        )
        self._have_last = True

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
            m = max(int(self.ticks[i]), 1)  # (counts are held as floats)
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
                    "nees_mean": float(self.nees_sum[i] / self.nees_count[i]) if self.nees_count[i] > 0 else "",
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
