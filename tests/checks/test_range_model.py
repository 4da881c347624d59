"""The estimators' range-beam model: ray cast, gradient, EKF beam update, beam likelihood,
the even-odd floor test and the particle filter's random draws, against outside references."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from filterpy.kalman import ExtendedKalmanFilter
from scipy import stats
from shapely.geometry import LineString, Point

from planners.estimators import ESTIMATORS
from planners.estimators.draws import MOTION, raw_words, standard_normals
from planners.estimators.ekf_kernels import range_updates
from planners.estimators.particle import free_floor
from planners.estimators.particle_kernels import beam_log_likelihood
from planners.raycast import expected_ranges
from planners.readings import Readings
from planners.se2 import compose, exp
from sim.scenario import load_scenario
from tests.planners.test_estimator_fixtures import CPR, DT, MOUNTS, WALLS, context

DOCK = load_scenario("scenarios/loading-dock-ranging.toml")
BEAMS = np.array([[*s.at, s.direction] for s in DOCK.sensors.range])


def _poses(k: int, seed: int) -> np.ndarray:
    # poses on the dock's free floor (shapely decides), uniform heading
    rng = np.random.default_rng(seed)
    out = []
    while len(out) < k:
        x, y = rng.uniform([0, 0], [12, 6])
        if DOCK.field.free_space.buffer(-0.35).contains(Point(x, y)):
            out.append([x, y, rng.uniform(-np.pi, np.pi)])
    return np.array(out)


def test_expected_ranges_equal_shapely_distance_along_the_ray() -> None:
    # reference: shapely 2, the first intersection of the ray (as a 30 m segment) with every
    # wall and obstacle edge, distance from the beam's origin
    poses = _poses(40, 51)
    ranges, _ = expected_ranges(DOCK.field.segments, poses, BEAMS)
    walls = shapely.union_all([DOCK.field.outline.boundary, *[o.boundary for o in DOCK.field.obstacle_shapes]])
    for i, (x, y, h) in enumerate(poses):
        for k, (mx, my, mh) in enumerate(BEAMS):
            o = compose(np.array([[x, y, h]]), np.array([[mx, my, mh]]))[0]
            end = o[:2] + 30.0 * np.array([np.cos(o[2]), np.sin(o[2])])
            hit = LineString([o[:2], end]).intersection(walls)
            assert ranges[i, k] == pytest.approx(Point(o[:2]).distance(hit), abs=1e-9)


def test_gradient_equals_central_differences() -> None:
    # d range / d pose against central differences, step 1e-6 (truncation error O(h^2);
    # common practice, no source), where both sides of the step hit the same wall
    poses = _poses(40, 52)
    _, grad = expected_ranges(DOCK.field.segments, poses, BEAMS)
    h = 1e-6
    checked = 0
    for a in range(3):
        step = np.zeros(3)
        step[a] = h
        up, _ = expected_ranges(DOCK.field.segments, poses + step, BEAMS)
        down, _ = expected_ranges(DOCK.field.segments, poses - step, BEAMS)
        mid, _ = expected_ranges(DOCK.field.segments, poses, BEAMS)
        numeric = (up - down) / (2 * h)
        # a corner between the two steps shows as a jump: leave those beams out
        smooth = np.abs((up - mid) - (mid - down)) < 1e-9
        np.testing.assert_allclose(grad[..., a][smooth], numeric[smooth], rtol=1e-5, atol=1e-6)
        checked += smooth.sum()
    assert checked > 0.95 * 3 * poses.shape[0] * BEAMS.shape[0]


def test_one_beam_update_equals_filterpy_extended_kalman_filter() -> None:
    # reference: filterpy.kalman.ExtendedKalmanFilter.update(z, HJacobian, Hx) (R. Labbe,
    # filterpy 1.4): K = P H' S^-1, x += K (z - h(x)), Joseph-form covariance, as ours
    rng = np.random.default_rng(53)
    for pose in _poses(10, 54):
        a = rng.normal(size=(3, 3))
        cov = a @ a.T * 1e-3 + np.diag([1e-4, 1e-4, 1e-4])
        k = int(rng.integers(len(BEAMS)))
        t, g = expected_ranges(DOCK.field.segments, pose[None], BEAMS[k : k + 1])
        z = t[0, 0] + 0.01
        p, pc = pose.copy(), cov.copy()
        beams = np.full(len(BEAMS), np.nan)
        beams[k] = z
        rejected = range_updates(p, pc, DOCK.field.segments, BEAMS, beams, np.full(len(BEAMS), 0.02**2), 1e9)
        assert rejected == 0
        ekf = ExtendedKalmanFilter(dim_x=3, dim_z=1)
        ekf.x, ekf.P, ekf.R = pose[:, None].copy(), cov.copy(), np.array([[0.02**2]])
        ekf.update(np.array([[z]]), lambda x: g[0], lambda x: t[0][:, None])
        np.testing.assert_allclose(p, ekf.x[:, 0], rtol=0, atol=1e-12)
        np.testing.assert_allclose(pc, ekf.P, rtol=0, atol=1e-12)


def test_a_beam_beyond_the_gate_is_rejected_and_changes_nothing() -> None:
    pose = np.array([6.0, 3.0, 0.1])
    cov = np.diag([1e-4, 1e-4, 1e-4])
    t, g = expected_ranges(DOCK.field.segments, pose[None], BEAMS[:1])
    s = g[0, 0] @ cov @ g[0, 0] + 0.01**2
    beams = np.full(len(BEAMS), np.nan)
    beams[0] = t[0, 0] + 3.0 * np.sqrt(s)  # nu^2 / s = 9 > 6.63 (chi-square 1 dof, 99 %)
    p, pc = pose.copy(), cov.copy()
    assert range_updates(p, pc, DOCK.field.segments, BEAMS, beams, np.full(len(BEAMS), 1e-4), 6.63) == 1
    np.testing.assert_array_equal(p, pose)
    np.testing.assert_array_equal(pc, cov)


def test_ekf_with_range_beams_holds_a_drifting_odometry() -> None:
    # measured: encoders 2 % long on one wheel (a heading and distance drift), no fixes; the
    # beams against the fixture's walls keep the EKF near the truth, odometry alone drifts
    rng = np.random.default_rng(55)
    ctx = context(ranges=True, fixes=False)
    inverse = ctx["geometry"].inverse_matrix
    pose = np.array([[0.5, 0.5, 0.3]])
    angle = np.zeros((1, 2))
    truth, readings = [], []
    for k in range(1200):
        if k:
            twist = np.array([[0.6, 0.0, 0.5 * np.sin(0.9 * k * DT)]]) * DT
            pose = compose(pose, exp(twist))
            angle = angle + (twist @ inverse.T) * [1.02, 1.0]
        d, _ = expected_ranges(WALLS, pose, MOUNTS)
        d = d + 0.01 * rng.standard_normal(d.shape)
        truth.append(pose[0].copy())
        readings.append(Readings(
            t=k * DT, encoder_counts=np.floor(angle * CPR / (2 * np.pi)),
            ranges=np.where(d <= 4.0, d, np.inf), range_valid=np.full((1, 3), k % 8 == 0),
        ))
    errors = {}
    for use in (True, False):
        est = ESTIMATORS.get("ekf")(ranges=use, **ctx)
        est.reset(truth[0][None], 1)
        out = np.array([est.update(r.t, r)[0] for r in readings])
        errors[use] = np.hypot(*(out[-1, :2] - truth[-1][:2]))
    assert errors[True] < 0.03 < 0.1 < errors[False], errors  # measured 0.006 m and 0.39 m


@pytest.mark.parametrize("t", [0.4, 2.5, 3.98, 4.03, np.inf])
@pytest.mark.parametrize("z", [0.41, 2.47, 3.99, np.inf])
def test_beam_likelihood_is_the_mixture_of_a_normal_and_an_outlier(z: float, t: float) -> None:
    # Thrun, Burgard, Fox, Probabilistic Robotics, 2005, §6.3 (beam model: hit, random and
    # max-range parts); densities from scipy.stats.norm
    zmax, sigma, e = 4.0, 0.02, 0.05
    got = beam_log_likelihood(z, t, zmax, sigma, e)
    if np.isfinite(z):
        hit = stats.norm.pdf(z, loc=t, scale=sigma) if np.isfinite(t) else 0.0
        ref = np.log((1 - e) * hit + e / zmax)
    else:
        beyond = stats.norm.cdf(t, loc=zmax, scale=sigma) if np.isfinite(t) else 1.0
        ref = np.log((1 - e) * beyond + e)
    assert got == pytest.approx(ref, rel=1e-12, abs=1e-12)
    assert got >= np.log(e / zmax) - 1e-12  # a beam that misses is never fatal


def test_free_floor_equals_shapely_contains() -> None:
    # reference: shapely 2 Polygon.contains on the dock's free space (boundary less obstacles)
    xy = np.random.default_rng(56).uniform([-0.5, -0.5], [12.5, 6.5], (4000, 2))
    ours = free_floor(DOCK.field.segments, xy)
    ref = shapely.contains_xy(DOCK.field.free_space, xy[:, 0], xy[:, 1])
    assert np.mean(ours == ref) == 1.0


def test_particle_draws_are_numpy_philox_and_normal() -> None:
    # reference: numpy.random.Philox, the Philox4x64-10 of Salmon, Moraes, Dror, Shaw,
    # "Parallel random numbers: as easy as 1, 2, 3", SC 2011: numpy increments its 256-bit
    # counter before each block, so our block at counter c is its first block from c - 1
    key = np.array([0x243F6A8885A308D3, 0x13198A2E03707344], dtype=np.uint64)
    ticks = np.array([1, 2, 77, 2**40 + 3])
    words = raw_words(key, ticks, 5, MOTION)
    for t, row in zip(ticks, words):
        counter = int(t) + (5 << 64) + (MOTION << 128)
        ref = np.random.Philox(counter=counter - 1, key=int(key[0]) + (int(key[1]) << 64))
        np.testing.assert_array_equal(row, ref.random_raw(4))
    # Box-Muller normals (Box and Muller 1958): Kolmogorov-Smirnov against scipy.stats.norm
    z = standard_normals(key, 20000)
    assert stats.kstest(z, "norm").pvalue > 0.01
    assert abs(z.mean()) < 0.02 and abs(z.std() - 1.0) < 0.02
