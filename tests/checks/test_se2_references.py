"""SE(2) against published formulas and against integration."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planners import se2


def _matrix(pose: np.ndarray) -> np.ndarray:
    # Homogeneous form T = [[R, p], [0, 1]] (Lynch & Park, Modern Robotics 2017, eq. 3.62)
    x, y, h = pose
    c, s = math.cos(h), math.sin(h)
    return np.array([[c, -s, x], [s, c, y], [0.0, 0.0, 1.0]])


def _expm_twist(tw: np.ndarray) -> np.ndarray:
    # Matrix exponential of the twist's se(2) matrix [[0, -w, vx], [w, 0, vy], [0, 0, 0]]
    # (Lynch & Park 2017, §3.3.3, eq. 3.88 restricted to the plane); scipy's expm is the reference.
    from scipy.linalg import expm

    vx, vy, w = tw
    return expm(np.array([[0.0, -w, vx], [w, 0.0, vy], [0.0, 0.0, 0.0]]))


@pytest.mark.parametrize(
    "twist",
    [[1.0, 0.0, 0.0], [0.5, 0.2, 1.0], [0.0, 0.0, 3.0], [-0.3, 0.7, -2.5], [1.0, 0.0, 1e-7], [0.2, -0.1, 3.1]],
)
def test_exp_equals_matrix_exponential(twist):
    # Lynch & Park 2017 §3.3.3: exp of a twist is the matrix exponential of its se(2) matrix.
    got = _matrix(se2.exp(np.array([twist]))[0])
    np.testing.assert_allclose(got, _expm_twist(np.array(twist)), atol=1e-12)


def test_exp_closed_form_sola():
    # Sola, Deray, Atchuthan 2018, App. A eq. (156): t = V(theta) rho,
    # V = [[sin t / t, -(1 - cos t)/t], [(1 - cos t)/t, sin t / t]]
    rho, theta = np.array([0.8, -0.3]), 0.9
    v = np.array([[math.sin(theta), -(1 - math.cos(theta))], [1 - math.cos(theta), math.sin(theta)]]) / theta
    got = se2.exp(np.array([[rho[0], rho[1], theta]]))[0]
    np.testing.assert_allclose(got[:2], v @ rho, atol=1e-14)
    assert got[2] == pytest.approx(theta)


def test_quarter_circle_worked_example():
    # A quarter circle of radius R: driving pi R / 2 at curvature 1/R ends at (R, R), heading 90 deg
    # (plane geometry, common practice, no source).
    r = 0.75
    got = se2.exp(np.array([[math.pi * r / 2, 0.0, math.pi / 2]]))[0]
    np.testing.assert_allclose(got, [r, r, math.pi / 2], atol=1e-12)


@pytest.mark.parametrize("twist", [[1.0, 0.0, 1.2], [0.4, 0.3, -2.0], [0.6, 0.0, 1e-6]])
def test_exact_arc_equals_limit_of_euler_steps(twist):
    # Composing n small Euler steps converges to the exact arc with error O(1/n).
    n = 20000
    step = np.array([twist]) / n
    pose = np.zeros((1, 3))
    for _ in range(n):
        c, s = math.cos(pose[0, 2]), math.sin(pose[0, 2])
        pose = pose + np.array([[c * step[0, 0] - s * step[0, 1], s * step[0, 0] + c * step[0, 1], step[0, 2]]])
    exact = se2.exp(np.array([twist]))
    np.testing.assert_allclose(pose[:, :2], exact[:, :2], atol=2e-4)
    # and composing the exact sub-arcs reproduces it to rounding
    pose = np.zeros((1, 3))
    small = se2.exp(step)
    for _ in range(200):
        pose = se2.compose(pose, se2.exp(np.array([twist]) / 200))
    np.testing.assert_allclose(pose, exact, atol=1e-10)
    assert small.shape == (1, 3)


def test_small_angle_series_is_continuous():
    # The series branch and the closed form agree across the switch point (|theta| = 1e-4);
    # the reference writes 1 - cos t as 2 sin^2(t/2), free of cancellation (common practice).
    for theta in (9.999e-5, 1.0001e-4, 1e-9):
        got = se2.exp(np.array([[1.0, 0.5, theta]]))[0]
        a, b = math.sin(theta) / theta, 2.0 * math.sin(theta / 2) ** 2 / theta
        np.testing.assert_allclose(got[:2], [a - 0.5 * b, b + 0.5 * a], rtol=1e-12)


def test_arc_series_is_correctly_rounded_to_one_ulp():
    # A = sin t / t and B = (1 - cos t) / t against their Taylor series summed exactly in
    # rational arithmetic (Abramowitz & Stegun 1964, 4.3.65 and 4.3.66), 15 terms, which is
    # exact far below one ulp for |t| <= 0.5: the compiled Horner form is within one ulp.
    from fractions import Fraction

    def exact(t: float) -> tuple[float, float]:
        q = Fraction(t)
        a = sum(Fraction((-1) ** k, math.factorial(2 * k + 1)) * q ** (2 * k) for k in range(15))
        b = sum(Fraction((-1) ** k, math.factorial(2 * k + 2)) * q ** (2 * k + 1) for k in range(15))
        return float(a), float(b)

    rng = np.random.default_rng(7)
    angles = np.concatenate([rng.uniform(-se2.SERIES_MAX, se2.SERIES_MAX, 400),
                             rng.uniform(-1e-3, 1e-3, 100), [se2.SERIES_MAX, -se2.SERIES_MAX, 1e-200]])
    for t in angles:
        got = se2.arc_series(float(t))
        for g, e in zip(got, exact(float(t))):
            assert abs(g - e) <= math.ulp(e), (t, g, e)


def test_carried_heading_cos_sin_stay_on_the_heading():
    # turn_trig rotates (cos h, sin h) by each turn instead of calling cos and sin: after
    # 100 000 random turns (small ones by the series, a few beyond SERIES_MAX afresh) they
    # still equal cos and sin of the summed heading (common practice, no source).
    from numba import njit

    @njit(cache=True)
    def carry(turns):
        c, s, h = 1.0, 0.0, 0.0
        worst = 0.0
        for t in turns:
            h += t
            c, s = se2.turn_trig(c, s, t, h)
            worst = max(worst, abs(c - np.cos(h)), abs(s - np.sin(h)))
        return worst

    rng = np.random.default_rng(3)
    turns = rng.normal(0.0, 0.02, 100_000)
    turns[::10_000] = 2.5  # beyond the series
    assert carry(turns) < 1e-12
