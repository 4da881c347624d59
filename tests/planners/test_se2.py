"""SE(2) shape contracts and algebraic invariants (hypothesis round trips)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planners import se2

coord = st.floats(-50, 50, allow_nan=False)
angle = st.floats(-10, 10, allow_nan=False)
tiny = st.floats(-1e-6, 1e-6, allow_nan=False)
pose_st = st.tuples(coord, coord, angle)
near_zero_st = st.tuples(coord, coord, tiny)


def _a(p) -> np.ndarray:
    return np.array([p], dtype=float)


def _same_pose(a, b, tol=1e-9):
    np.testing.assert_allclose(a[:, :2], b[:, :2], atol=tol)
    np.testing.assert_allclose(se2.wrap(a[:, 2] - b[:, 2]), 0.0, atol=tol)


@pytest.mark.parametrize("n", [0, 1, 5])
def test_shapes(n):
    p = np.random.default_rng(0).normal(size=(n, 3))
    for out in (se2.compose(p, p), se2.inverse(p), se2.between(p, p), se2.exp(p), se2.log(p)):
        assert out.shape == (n, 3)


def test_bad_shape_is_an_error():
    with pytest.raises(ValueError, match=r"must have shape \(N, 3\)"):
        se2.exp(np.zeros(3))


@given(st.floats(-1e6, 1e6, allow_nan=False))
def test_wrap_range(a):
    w = float(se2.wrap(a))
    assert -math.pi < w <= math.pi
    assert math.isclose(math.cos(w), math.cos(a), abs_tol=1e-6)


def test_wrap_boundaries():
    assert float(se2.wrap(math.pi)) == pytest.approx(math.pi)
    assert float(se2.wrap(-math.pi)) == pytest.approx(math.pi)
    assert float(se2.wrap(0.0)) == 0.0


@given(st.one_of(pose_st, near_zero_st))
def test_exp_log_round_trip(p):
    pose = _a(p)
    _same_pose(se2.exp(se2.log(pose)), pose, tol=1e-8)


@given(st.one_of(st.tuples(coord, coord, st.floats(-3.1, 3.1)), near_zero_st))
def test_log_exp_round_trip(tw):
    twist = _a(tw)
    np.testing.assert_allclose(se2.log(se2.exp(twist)), twist, atol=1e-8)


@settings(max_examples=50)
@given(pose_st, pose_st, pose_st)
def test_compose_associative(a, b, c):
    a, b, c = _a(a), _a(b), _a(c)
    _same_pose(se2.compose(se2.compose(a, b), c), se2.compose(a, se2.compose(b, c)), tol=1e-8)


@given(st.one_of(pose_st, near_zero_st))
def test_inverse_is_identity(p):
    t = _a(p)
    _same_pose(se2.compose(t, se2.inverse(t)), np.zeros((1, 3)), tol=1e-9)
    _same_pose(se2.between(t, t), np.zeros((1, 3)), tol=1e-9)


def test_batch_equals_rows():
    rng = np.random.default_rng(3)
    a, b = rng.normal(size=(7, 3)), rng.normal(size=(7, 3))
    whole = se2.compose(a, b)
    for i in range(7):
        np.testing.assert_array_equal(whole[i : i + 1], se2.compose(a[i : i + 1], b[i : i + 1]))
