"""``particle``: a particle filter on the pose with odometry motion and fix likelihood.

Motion (sampled): each particle moves by the odometry increment ``u`` perturbed in the body
frame with the variances of the ``ekf`` model (``distance_noise^2 d``, ``turn_noise^2 |du|
+ drift_noise^2 d``). Measurement: a fix ``z`` weighs a particle by the Gaussian likelihood
``exp(-nu' R^-1 nu / 2)`` (heading error wrapped). Resampling: systematic, when the
effective sample size ``1 / sum w^2`` falls below half the particles (Thrun, Burgard, Fox,
*Probabilistic Robotics*, 2005, Table 4.4 "low variance sampler"). The estimate is the
weighted mean (circular mean for heading). Fix latency and range sensors are not used.

Start: ``init = "start"`` puts every particle on the start pose; ``"uniform"`` draws them
uniformly over the free floor of the field (inside the boundary, outside every obstacle,
by the even-odd crossing rule over the wall segments) with uniform heading, for a robot
that does not know where it was put down (global localisation, Thrun, Burgard, Fox, 2005,
§8.3). Sensor resetting (Lenser and Veloso, "Sensor resetting localization for poorly
modelled mobile robots", ICRA 2000): when even the best particle is further from a fix than
the chi-square gate ``reset_gate`` (squared Mahalanobis distance, 3 dof), no particle explains
it, and the whole cloud is redrawn from the fix distribution ``N(z, R)``. This is what lets a
uniform start (a few hundred particles over a whole floor) lock on at the first fix, and a
kidnapped robot recover. It is off by default: fixes are taken as current, so a late fix of
a fast robot (100 ms at 1.5 m/s is 15 cm, 7 sigma of a 2 cm fix) would look unexplained and
reset the cloud onto a stale pose; use it with current fixes.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.estimators import ESTIMATORS
from planners.estimators.common import (
    SOURCE_PARAM, as_start, fix_sigma, make_odometry, need_fixes, valid_fixes, split_params,
)
from planners.errors import ScenarioError
from planners.params import Param
from planners.readings import Readings
from planners.se2 import between, compose, wrap


def free_floor(segments: np.ndarray, xy: np.ndarray) -> np.ndarray:
    """Bool (K,): points ``xy`` (K, 2) [m] inside the walls ``segments`` (S, 4) by the even-odd rule.

    A ray towards +x from each point crosses the boundary an odd number of times from inside
    and every obstacle ring an even number of times from outside it (O'Rourke,
    *Computational Geometry in C*, 1998, §7.4).
    """
    x0, y0, x1, y1 = (segments[None, :, j] for j in range(4))
    px, py = xy[:, 0:1], xy[:, 1:2]
    spans = (y0 > py) != (y1 > py)
    with np.errstate(divide="ignore", invalid="ignore"):
        cross_x = x0 + (py - y0) * (x1 - x0) / (y1 - y0)
    return np.sum(spans & (cross_x > px), axis=1) % 2 == 1


@ESTIMATORS.register("particle")
class ParticleFilter:
    """Particle filter (M particles per robot) with odometry motion and fix updates.

    Parameters
    ----------
    source : odometry source
    particles : int — M
    distance_noise, turn_noise, drift_noise : float — as for ``ekf``
    reset_gate : float — chi-square distance of a fix from the best particle that redraws the cloud
    init : {"start", "uniform"} — where the particles start
    **context : geometry, sensors (with ``fixes``), field, dt from the runner
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "source": SOURCE_PARAM,
        "particles": Param("count", 200, "particles per robot", ge=2),
        "distance_noise": Param(
            "dimensionless", 0.02, "position std after 1 m driven [m/sqrt(m)]", ge=0.0
        ),
        "turn_noise": Param(
            "dimensionless", 0.05, "heading std after 1 rad turned [rad/sqrt(rad)]", ge=0.0
        ),
        "drift_noise": Param(
            "dimensionless", 0.02, "heading std after 1 m driven [rad/sqrt(m)]", ge=0.0
        ),
        "reset_gate": Param(
            "dimensionless", 0.0,
            "redraw the cloud at a fix no particle explains (chi-square, 3 dof, e.g. 11.34; 0 = never)",
            ge=0.0,
        ),
        "init": Param(
            "choice", "start", "particles on the start pose, or uniform over the free floor",
            choices=("start", "uniform"),
        ),
    }

    def __init__(self, **kwargs: Any) -> None:
        context, p = split_params("estimator.particle", self.PARAMS, kwargs)
        source, particles = p["source"], p["particles"]
        distance_noise, turn_noise = p["distance_noise"], p["turn_noise"]
        drift_noise = p["drift_noise"]
        need_fixes(context, where="estimator.particle")
        self._context = context
        self._odo = make_odometry(context, source, where="estimator.particle")
        self.m = int(particles)
        self.noise = (float(distance_noise), float(turn_noise), float(drift_noise))
        self.init = p["init"]
        self.reset_gate = float(p["reset_gate"])
        segments = getattr(context.get("field"), "segments", None)
        self._segments = np.zeros((0, 4)) if segments is None else np.asarray(segments, float)
        if self.init == "uniform" and self._segments.shape[0] < 3:
            raise ScenarioError(
                "estimator.particle: init must be 'start' on a field without walls, got 'uniform'"
            )
        self.reset(np.zeros((0, 3)), 0, rngs=[])

    def reset(self, pose0: np.ndarray, n: int, *, rngs: list | None = None) -> None:
        """Start every particle at ``pose0`` (N, 3); ``rngs`` is one Generator per robot."""
        if rngs is None or len(rngs) != n:
            raise ValueError(f"estimator.particle: rngs must be {n} numpy Generators, got {rngs!r}")
        self._rngs = list(rngs)
        start = as_start(pose0, n)
        self._odo.reset(start)
        self._odo_prev = start.copy()
        self._p = np.repeat(start[:, None, :], self.m, axis=1)
        if self.init == "uniform":
            for i, g in enumerate(self._rngs):
                self._p[i] = self._uniform(g)
        self._w = np.full((n, self.m), 1.0 / self.m)
        self._pose = start

    def update(self, t: float, readings: Readings) -> np.ndarray:
        """Weighted-mean pose (N, 3), field frame."""
        n, m = self._w.shape
        odo = self._odo.update(readings)
        step = between(self._odo_prev, odo)
        self._odo_prev = odo
        kd, kt, kh = self.noise
        d = np.hypot(step[:, 0], step[:, 1])
        sd = np.sqrt(kd * kd * d)
        st = np.sqrt(kt * kt * np.abs(step[:, 2]) + kh * kh * d)
        scale = np.column_stack([sd, sd, st])
        noise = np.zeros((n, m, 3))
        for i, g in enumerate(self._rngs):
            noise[i] = g.standard_normal((m, 3))
        moves = step[:, None, :] + noise * scale[:, None, :]
        self._p = compose(self._p.reshape(-1, 3), moves.reshape(-1, 3)).reshape(n, m, 3)
        mask = valid_fixes(readings, n)
        if mask.any():
            sig = np.maximum(fix_sigma(self._context, readings), 1e-9)
            nu = np.nan_to_num(readings.fix)[:, None, :] - self._p
            nu[..., 2] = wrap(nu[..., 2])
            d2 = np.sum((nu / sig) ** 2, axis=2)
            lost = mask & (self.reset_gate > 0.0) & (d2.min(axis=1) > self.reset_gate)
            logl = -0.5 * d2
            logl -= logl.max(axis=1, keepdims=True)
            w = self._w * np.exp(logl)
            w /= w.sum(axis=1, keepdims=True)
            self._w = np.where(mask[:, None], w, self._w)
            for i in np.flatnonzero(mask & ~lost & (1.0 / np.sum(self._w**2, axis=1) < 0.5 * m)):
                self._resample(i)
            for i in np.flatnonzero(lost):
                # sensor resetting: the cloud drawn from the fix distribution N(z, R)
                cloud = readings.fix[i] + sig * self._rngs[i].standard_normal((m, 3))
                cloud[:, 2] = wrap(cloud[:, 2])
                self._p[i], self._w[i] = cloud, 1.0 / m
        w = self._w
        self._pose = np.column_stack([
            np.sum(w * self._p[..., 0], axis=1),
            np.sum(w * self._p[..., 1], axis=1),
            np.arctan2(
                np.sum(w * np.sin(self._p[..., 2]), axis=1),
                np.sum(w * np.cos(self._p[..., 2]), axis=1),
            ),
        ])
        return self._pose.copy()

    def _uniform(self, g: np.random.Generator) -> np.ndarray:
        """M poses (M, 3) uniform over the free floor (rejection from the bounding box)."""
        seg = self._segments
        xs, ys = seg[:, [0, 2]], seg[:, [1, 3]]
        lo, hi = np.array([xs.min(), ys.min()]), np.array([xs.max(), ys.max()])
        out = np.empty((0, 2))
        while out.shape[0] < self.m:
            xy = lo + (hi - lo) * g.random((2 * self.m, 2))
            out = np.vstack([out, xy[free_floor(seg, xy)]])
        heading = wrap(np.pi * (2.0 * g.random(self.m) - 1.0))
        return np.column_stack([out[: self.m], heading])

    def _resample(self, i: int) -> None:
        # systematic ("low variance") resampling: one uniform draw, M evenly spaced pointers
        m = self.m
        pointers = (self._rngs[i].random() + np.arange(m)) / m
        idx = np.minimum(np.searchsorted(np.cumsum(self._w[i]), pointers), m - 1)
        self._p[i] = self._p[i, idx]
        self._w[i] = 1.0 / m

    @property
    def covariance(self) -> np.ndarray:
        """Weighted particle covariance (N, 3, 3), heading deviations wrapped about the mean.

        A floor of 1e-10 on the diagonal keeps it invertible when all particles coincide
        (at the start).
        """
        dev = self._p - self._pose[:, None, :]
        dev[..., 2] = wrap(dev[..., 2])
        return np.einsum("nm,nmi,nmj->nij", self._w, dev, dev) + 1e-10 * np.eye(3)
