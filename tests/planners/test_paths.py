"""Unit tests of planners/paths.py: Hermite data, arc length, evaluation, joints, errors."""

from __future__ import annotations

import numpy as np
import pytest

from planners.errors import PlanError
from planners.paths import Path, _poly, spline_path

ROUTE = np.array([[0.0, 0.0], [2.0, 0.0], [3.0, 1.0], [2.0, 2.5], [0.5, 2.0], [0.0, 3.0]])


def test_hermite_segment_meets_its_end_data():
    rng = np.random.default_rng(3)
    p0, p1, d0, d1, dd0, dd1 = rng.normal(size=(6, 1, 2))
    path = Path.from_hermite(p0, p1, d0, d1, dd0, dd1)
    seg = np.zeros(2, dtype=int)
    u = np.array([0.0, 1.0])
    assert np.allclose(_poly(path.coeffs, seg, u, 0), [p0[0], p1[0]])
    assert np.allclose(_poly(path.coeffs, seg, u, 1), [d0[0], d1[0]])
    assert np.allclose(_poly(path.coeffs, seg, u, 2), [dd0[0], dd1[0]])


def test_arc_length_of_a_straight_chain_is_exact():
    pts = np.array([[0.0, 0.0], [1.0, 0.0], [3.0, 0.0], [3.5, 0.0]])
    path = spline_path(pts)
    assert np.allclose(path.knot_s, [0.0, 1.0, 3.0, 3.5], atol=1e-12)
    s = np.linspace(0.0, 3.5, 71)
    e = path.evaluate(s)
    assert np.allclose(e.xy[:, 0], s, atol=1e-12) and np.allclose(e.xy[:, 1], 0.0)
    assert np.allclose(e.curvature, 0.0) and np.allclose(e.direction, 0.0)


def test_straight_leg_between_aligned_directions():
    # heading given along the chord at both ends of leg 1 -> that leg is a line
    pts = np.array([[0.0, 0.0], [1.0, 1.0], [3.0, 1.0], [4.0, 2.0]])
    dirs = np.array([np.nan, 0.0, 0.0, np.nan])
    path = spline_path(pts, directions=dirs)
    s = np.linspace(path.knot_s[1], path.knot_s[2], 50)
    e = path.evaluate(s)
    assert np.allclose(e.xy[:, 1], 1.0, atol=1e-12)
    assert np.allclose(e.curvature, 0.0, atol=1e-9)
    assert path.knot_s[2] - path.knot_s[1] == pytest.approx(2.0, abs=1e-12)


def test_locate_inverts_arc_length():
    path = spline_path(ROUTE)
    s = np.linspace(0.0, path.length, 997)
    seg, u = path.locate(s)
    # arc length from the segment start to u by fine trapezoid quadrature
    for k in (3, 400, 990):
        uu = np.linspace(0.0, u[k], 20001)
        sp = np.linalg.norm(_poly(path.coeffs, np.full(uu.size, seg[k]), uu, 1), axis=1)
        arc = path.knot_s[seg[k]] + np.sum(0.5 * (sp[1:] + sp[:-1]) * np.diff(uu))
        assert arc == pytest.approx(s[k], abs=1e-8)


def test_evaluate_derivatives_agree_with_finite_differences():
    path = spline_path(ROUTE)
    s = np.linspace(0.1, path.length - 0.1, 40)
    h = 1e-5
    a, b, c = path.evaluate(s - h), path.evaluate(s), path.evaluate(s + h)
    tangent = (c.xy - a.xy) / (2 * h)
    assert np.allclose(np.linalg.norm(tangent, axis=1), 1.0, atol=1e-6)
    assert np.allclose(np.arctan2(tangent[:, 1], tangent[:, 0]), b.direction, atol=1e-6)
    turn = np.angle(np.exp(1j * (c.direction - a.direction))) / (2 * h)
    assert np.allclose(turn, b.curvature, atol=1e-4)
    assert np.allclose((c.curvature - a.curvature) / (2 * h), b.curvature_rate, atol=1e-3)


def test_grid_contains_every_joint_and_respects_the_step():
    path = spline_path(ROUTE)
    g = path.grid(0.01)
    assert np.all(np.isin(path.knot_s, g))
    assert np.diff(g).max() <= 0.01 + 1e-12 and np.all(np.diff(g) > 0)


def test_cusp_reverses_direction_and_corner_breaks_it():
    pts = np.array([[0.0, 0.0], [2.0, 0.0], [1.0, 0.5]])
    cusp = spline_path(pts, directions=np.array([0.0, np.nan, np.nan]),
                       cusp=np.array([False, True, False]))
    s1 = cusp.knot_s[1]
    before, after = cusp.evaluate(np.array([s1 - 1e-9])), cusp.evaluate(np.array([s1]))
    gap = np.angle(np.exp(1j * (after.direction - before.direction)))
    assert abs(gap[0]) == pytest.approx(np.pi, abs=1e-6)
    assert cusp.breaks.tolist() == [False, True, False]
    corner = spline_path(pts, corner=np.array([False, True, False]))
    s1 = corner.knot_s[1]
    before, after = corner.evaluate(np.array([s1 - 1e-9])), corner.evaluate(np.array([s1]))
    # each side is a straight two-point piece: arrive along +x, leave towards the last point
    assert before.direction[0] == pytest.approx(0.0, abs=1e-6)
    assert after.direction[0] == pytest.approx(np.arctan2(0.5, -1.0), abs=1e-6)


def test_path_projection_uses_the_window_on_a_hairpin():
    # out along y = 0 and back along y = 0.2: a point near the return pass, with progress
    # still on the way out, projects onto the way out
    pts = np.array([[0.0, 0.0], [3.0, 0.0], [3.1, 0.1], [3.0, 0.2], [0.0, 0.2]])
    path = spline_path(pts, directions=np.array([0.0, 0.0, np.pi / 2, np.pi, np.pi]))
    s, d = path.project(np.array([[1.0, 0.15]]), np.array([0.9]), back=0.1, ahead=0.5)
    assert s[0] == pytest.approx(1.0, abs=1e-3) and d[0] == pytest.approx(0.15, abs=1e-4)
    s, d = path.project(np.array([[1.0, 0.15]]), np.array([path.length - 1.1]))
    assert s[0] > 3.0 and d[0] == pytest.approx(0.05, abs=1e-3)  # return pass runs -x


def test_project_empty_batch():
    s, d = spline_path(ROUTE).project(np.zeros((0, 2)), np.zeros(0))
    assert s.shape == (0,) and d.shape == (0,)


@pytest.mark.parametrize("pts, dirs, match", [
    ([[0, 0], [1, 0], [1, 0]], None, r"waypoint\[1\] must differ from waypoint\[0\]"),
    ([[0, 0], [1, 0], [0, 0]], None, "must not turn the path back on itself"),
    ([[0, 0], [2, 0], [2.05, 0], [4, 0]], [np.nan, np.pi / 2, np.pi / 2, np.nan],
     "must be farther from .* the path that loops|must be farther from"),
])
def test_spline_errors(pts, dirs, match):
    labels = ["the start", "waypoint[0]", "waypoint[1]", "waypoint[2]"]
    with pytest.raises(PlanError, match=match):
        spline_path(np.array(pts, dtype=float), labels=labels,
                    directions=None if dirs is None else np.array(dirs))


def test_spline_needs_two_points():
    with pytest.raises(PlanError, match="points must number at least 2, got 1"):
        spline_path(np.zeros((1, 2)))


def test_plan_projection_window_start_matches_a_full_search():
    # planners.plan.project_one finds the window's first segment by a walk from where even
    # spacing would put it; on unevenly spaced points it must give what a search of every
    # segment in the window gives (the nearest point whose arc length is in the window)
    from planners.plan import project_one, segment_block

    rng = np.random.default_rng(5)
    for trial in range(40):
        m = int(rng.integers(1, 60))
        steps = rng.uniform(0.001, 0.05, m - 1) * (rng.uniform(size=m - 1) < 0.9)  # some repeats
        ps = np.concatenate([[0.0], np.cumsum(steps)])
        ang = np.cumsum(rng.normal(0.0, 0.3, m))
        px = np.concatenate([[0.0], np.cumsum(steps * np.cos(ang[1:]))])
        py = np.concatenate([[0.0], np.cumsum(steps * np.sin(ang[1:]))])
        for _ in range(10):
            qx, qy = rng.uniform(-0.3, 0.6, 2)
            s_prev = rng.uniform(-0.1, ps[-1] + 0.1)
            s, d = project_one(segment_block(px, py, ps), qx, qy, s_prev, 0.05, 0.05)
            # brute force: segments from the first whose end passes s_prev - back
            first = next((j for j in range(m - 1) if ps[j + 1] >= s_prev - 0.05), max(m - 2, 0))
            best = (np.inf, ps[0], 0.0)
            j = first
            while j < m - 1 and (ps[j] <= s_prev + 0.05 or j == first):
                e = np.array([px[j + 1] - px[j], py[j + 1] - py[j]])
                ll = e @ e
                u = min(1.0, max(0.0, ((qx - px[j]) * e[0] + (qy - py[j]) * e[1]) / ll)) if ll > 0 else 0.0
                c = np.array([px[j] + u * e[0] - qx, py[j] + u * e[1] - qy])
                if c @ c < best[0]:
                    side = e[0] * (qy - py[j]) - e[1] * (qx - px[j])
                    best = (c @ c, ps[j] + u * (ps[j + 1] - ps[j]), np.sqrt(c @ c) * (1 if side >= 0 else -1))
                j += 1
            assert (s, d) == pytest.approx(best[1:], abs=1e-12), (trial, m, s_prev)
