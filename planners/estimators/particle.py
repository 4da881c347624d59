"""``particle``: Monte Carlo localisation: odometry motion, fix and range-beam weights.

Motion (sampled): each particle moves by the odometry increments perturbed in its body frame
with the variances of the ``ekf`` model (``distance_noise^2 d`` along, ``lateral_noise^2 d``
across, ``turn_noise^2 |du| + drift_noise^2 d`` or the gyro's ``N^2 T`` in heading, plus
per-tick floors). The noise is drawn once per measurement, with the variances summed since
the previous one; between measurements the particles move by the exact composition of the
increments, carried as one pose and applied when needed (so the estimate costs O(1) per
robot on a tick without a measurement, and its spread grows only when one arrives). This
differs from drawing at every tick only by the turn within one measurement period.
Measurements multiply the weights:

* a fix ``z``: the Gaussian likelihood ``exp(-nu' R^-1 nu / 2)`` (heading error wrapped);
* each range beam (``ranges = true``, the default when the robot has range sensors): the
  expected range ``t`` is cast from every particle against the field's walls
  (:mod:`planners.raycast`) and the reading weighed by the beam model of Thrun, Burgard,
  Fox, *Probabilistic Robotics*, 2005, §6.3 reduced to three parts: with probability
  ``1 - range_outlier`` the true range plus ``N(0, range_sigma^2)`` (read as ``inf`` beyond
  the sensor's maximum range, probability ``Phi((t - max) / sigma)``), else an outlier,
  uniform over ``[0, max]`` or a missed beam. So one wrong beam lowers a particle's weight by
  a bounded factor and is never fatal.

Resampling: systematic, when the effective sample size ``1 / sum w^2`` falls below
``resample`` times the particles (Thrun, Burgard, Fox, 2005, Table 4.4 "low variance
sampler"). The estimate is the weighted mean (circular mean for heading). Fix latency is not
modelled: fixes are taken as current (use the ``ekf`` for late fixes).

Start: ``init = "start"`` puts every particle on the start pose; ``"uniform"`` draws them
uniformly over the free floor of the field (inside the boundary, outside every obstacle,
by the even-odd crossing rule over the wall segments) with uniform heading, for a robot
that does not know where it was put down (global localisation, Thrun, Burgard, Fox, 2005,
§8.3). Range beams against walls that are not symmetric single out the pose; with fixes,
sensor resetting (Lenser and Veloso, "Sensor resetting localization for poorly
modelled mobile robots", ICRA 2000) helps: when even the best particle is further from a fix
than the chi-square gate ``reset_gate`` (squared Mahalanobis distance, 3 dof), no particle
explains it, and the whole cloud is redrawn from the fix distribution ``N(z, R)``; with
``inject`` a share of the particles is redrawn from every fix, so that a cloud that settled
on a wrong spot near the truth keeps neighbours that can take over. Both are off
by default: a late fix of a fast robot (100 ms at 1.5 m/s is 15 cm, 7 sigma of a 2 cm fix)
would look unexplained and reset the cloud onto a stale pose; use it with current fixes.

Speed: one compiled call per tick over the batch (:mod:`planners.estimators.particle_kernels`);
robot k's draws come from a counter-based generator keyed from its own ``Generator``
(:mod:`planners.estimators.draws`), so run k is the same alone or in any batch.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.errors import ScenarioError
from planners.estimators import ESTIMATORS
from planners.estimators.beams import RANGE_SIGMA_PARAM, Beams, beam_readings, make_beams
from planners.estimators.common import (
    MOTION_PARAMS, SOURCE_PARAM, FixFeed, as_start, make_odometry, motion_noise, split_params,
)
from planners.estimators.draws import robot_keys
from planners.estimators.particle_kernels import (
    inside_kernel, moments_kernel, particle_covariance, particle_tick, uniform_start,
)
from planners.params import Param
from planners.readings import Readings
from planners.se2 import compose


def free_floor(segments: np.ndarray, xy: np.ndarray) -> np.ndarray:
    """Bool (K,): points ``xy`` (K, 2) [m] inside the walls ``segments`` (S, 4) by the even-odd rule.

    A ray towards +x from each point crosses the boundary an odd number of times from inside
    and every obstacle ring an even number of times from outside it (O'Rourke,
    *Computational Geometry in C*, 1998, §7.4).
    """
    xy = np.ascontiguousarray(xy, dtype=np.float64).reshape(-1, 2)
    out = np.empty(xy.shape[0], dtype=np.bool_)
    inside_kernel(np.ascontiguousarray(segments, dtype=np.float64).reshape(-1, 4), xy, out)
    return out


@ESTIMATORS.register("particle")
class ParticleFilter:
    """Particle filter (M particles per robot) with odometry motion, fix and range weights.

    Parameters
    ----------
    source : odometry source
    particles : int — M
    distance_noise, turn_noise, drift_noise, lateral_noise, floor_xy, floor_heading :
        the increment noise, as for ``ekf``
    reset_gate : float — chi-square distance of a fix from the best particle that redraws the cloud
    inject : float — share of the particles redrawn from every fix (a partial reset)
    init : {"start", "uniform"} — where the particles start
    ranges : bool — weigh by the range sensors (when the robot has any)
    range_sigma : float or None — range noise assumed [m]
    range_outlier : float — probability that a beam reads anything (a person, glass, a miss)
    resample : float — resample below this effective sample size, as a share of M
    **context : geometry, sensors (``fixes`` and/or ``range``), field, dt from the runner

    Raises
    ------
    ScenarioError
        Without fixes and without range sensors to use; ``init = "uniform"`` or range sensors
        on a field without walls.
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "particles": Param("count", 200, "particles per robot", ge=2),
        **MOTION_PARAMS,
        "reset_gate": Param(
            "dimensionless", 0.0,
            "redraw the cloud at a fix no particle explains (chi-square, 3 dof, e.g. 11.34; 0 = never)",
            ge=0.0,
        ),
        "inject": Param(
            "dimensionless", 0.0,
            "share of the particles redrawn from every fix (partial sensor reset; 0 = none)",
            ge=0.0, lt=1.0,
        ),
        "init": Param(
            "choice", "start", "particles on the start pose, or uniform over the free floor",
            choices=("start", "uniform"),
        ),
        "ranges": Param("bool", True, "weigh particles by the range sensors (when present)"),
        "range_sigma": RANGE_SIGMA_PARAM,
        "range_outlier": Param(
            "dimensionless", 0.05, "probability a beam reads anything (outlier or missed beam)",
            gt=0.0, lt=1.0,
        ),
        "resample": Param(
            "dimensionless", 0.5, "resample below this effective sample size (share of particles)",
            gt=0.0, le=1.0,
        ),
    }

    def __init__(self, **kwargs: Any) -> None:
        where = "estimator.particle"
        context, p = split_params(where, self.PARAMS, kwargs)
        self.beams: Beams | None = (
            make_beams(context, p["range_sigma"], where=where, required=False) if p["ranges"] else None
        )
        if getattr(context.get("sensors"), "fixes", None) is None and self.beams is None:
            raise ScenarioError(
                f"{where}: sensors.fixes must be present (or range sensors with ranges = true), got None"
            )
        self._odo = make_odometry(context, p["source"], where=where, positions=False)
        self._noise = motion_noise(context, p)
        self._fixes = FixFeed(context)
        self.m = int(p["particles"])
        self.init = p["init"]
        self.reset_gate = float(p["reset_gate"])
        self.inject = int(round(float(p["inject"]) * self.m))
        self.outlier = float(p["range_outlier"])
        self.resample = float(p["resample"])
        segments = getattr(context.get("field"), "segments", None)
        self._segments = (
            np.zeros((0, 4)) if segments is None else np.ascontiguousarray(segments, dtype=np.float64)
        )
        if self.init == "uniform" and self._segments.shape[0] < 3:
            raise ScenarioError(f"{where}: init must be 'start' on a field without walls, got 'uniform'")
        b = self.beams
        self._beam_args = (
            (np.zeros((0, 4)), np.zeros((0, 3)), np.zeros(0), np.zeros(0)) if b is None
            else (b.segments, b.mounts, b.max_range, np.sqrt(b.variance))
        )
        self.reset(np.zeros((0, 3)), 0, rngs=[])

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start every particle at ``pose0`` (N, 3) (or uniformly); ``rngs``: one Generator per robot."""
        if rngs is None or len(rngs) != n:
            raise ValueError(f"estimator.particle: rngs must be {n} numpy Generators, got {rngs!r}")
        self._keys = robot_keys(list(rngs))
        start = as_start(pose0, n)
        self._odo.reset(start)
        self._p = np.ascontiguousarray(np.repeat(start[:, None, :], self.m, axis=1))
        self._w = np.full((n, self.m), 1.0 / self.m)
        if self.init == "uniform" and n:
            uniform_start(self._segments, self._keys, self._p, self._w)
        self._pose = np.ascontiguousarray(start)
        self._delta = np.zeros((n, 3))
        self._spread = np.zeros((n, 3))
        self._moments = np.zeros((n, 4))
        moments_kernel(self._p, self._w, self._moments)
        self._tick = 0
        self._ll = np.zeros(self.m)
        self._spare = np.zeros((self.m, 3))
        self._no_beams = (np.empty((n, 0)), np.empty((n, 0), dtype=np.bool_))
        self._cov = np.zeros((n, 3, 3))

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Weighted-mean pose (N, 3), field frame."""
        n = self._pose.shape[0]
        self._odo.update(readings, copy=False)
        fix, valid, _ = self._fixes.arrays(readings, n)
        ranges, range_valid = beam_readings(readings, self.beams, self._no_beams)
        segs, mounts, rmax, rsig = self._beam_args
        particle_tick(
            self._tick, self._odo.increment, self._keys, self._noise, self._p, self._w,
            self._delta, self._spread, self._moments, self._ll, self._spare, fix, valid, self._fixes.sigma, self.reset_gate, self.inject,
            ranges, range_valid, segs, mounts, rmax, rsig, self.outlier,
            self.resample * self.m, self._pose,
        )
        self._tick += 1
        return self._pose.copy()

    @property
    def particles(self) -> np.ndarray:
        """Particles (N, M, 3) [m, m, rad], field frame, as of now (a copy)."""
        n = self._p.shape[0]
        moved = compose(self._p.reshape(-1, 3), np.repeat(self._delta, self.m, axis=0))
        return moved.reshape(n, self.m, 3)

    @property
    def weights(self) -> np.ndarray:
        """Normalised weights (N, M) (a copy)."""
        return self._w.copy()

    @property
    def covariance(self) -> np.ndarray:
        """Weighted particle covariance (N, 3, 3), heading deviations wrapped about the mean.

        A floor of 1e-10 on the diagonal keeps it invertible when all particles coincide
        (at the start).
        """
        particle_covariance(self._p, self._w, self._delta, self._pose, self._cov)
        return self._cov.copy()
