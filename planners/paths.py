"""Paths: chains of quintic Hermite segments, with arc length, curvature and projection.

A :class:`Path` is a chain of segments ``P_i(u)``, ``u in [0, 1]``, each a quintic
polynomial fixed by its end points, first derivatives and second derivatives (quintic
Hermite interpolation). :func:`spline_path` builds one through points, continuous in
direction and curvature at every joint except at *cusps*, where the direction of travel
reverses (the robot stops there and backs up), and at *corners*, where it may change at
will (a holonomic robot stops there and sets off another way).

The rule for a joint whose direction is not given:

* direction: the tangent at the point of the circle through it and its two neighbours,
  ``t ~ u_in * L_out + u_out * L_in`` (unit chords ``u``, chord lengths ``L``); collinear
  points give the line;
* at an end of the path or a corner, with no direction given: the neighbour's direction
  mirrored about the chord (a circle-like end), or the chord when both ends are free;
* at a cusp with no direction given: the mean of the unit chords arriving from both
  neighbours;
* curvature: the mean, weighted by chord length, of the curvatures of the two circles that
  touch the joint's direction and pass through one neighbour each (the circle through three
  points when the direction came from that rule; a near neighbour with a heading that
  disagrees does not dominate); at an end, the one such circle; zero at both ends of a
  straight leg;
* a leg whose end directions both lie within ``straight_tol`` of its chord is a straight
  line (the directions are snapped to the chord);
* the tangent magnitude of a leg (same at both ends) is the arc length of a circular arc
  over the chord turning by half the difference of the end directions' angles to the chord,
  ``L * phi / sin(phi)`` (``L`` for an S-shaped leg); second derivatives are normal to the
  direction, ``kappa * |P'|^2``, so the parameter speed is stationary at the joints.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import NamedTuple

import numpy as np

from planners.errors import PlanError
from planners.plan import _project_kernel, segment_block

# columns: p0, d0, dd0, dd1, d1, p1; rows: coefficient of u^0 .. u^5 (quintic Hermite basis)
_HERMITE = np.array(
    [
        [1.0, 0.0, 0.0, 0.0, 0.0, 0.0],
        [0.0, 1.0, 0.0, 0.0, 0.0, 0.0],
        [0.0, 0.0, 0.5, 0.0, 0.0, 0.0],
        [-10.0, -6.0, -1.5, 0.5, -4.0, 10.0],
        [15.0, 8.0, 1.5, -1.0, 7.0, -15.0],
        [-6.0, -3.0, -0.5, 0.5, -3.0, 6.0],
    ]
)
_GX, _GW = np.polynomial.legendre.leggauss(8)
_GX, _GW = (_GX + 1.0) / 2.0, _GW / 2.0  # Gauss-Legendre nodes and weights on [0, 1]
_SUB = 16  # sub-intervals per segment in the arc-length table


class PathSample(NamedTuple):
    """Path geometry at arc lengths ``s`` (each array has leading axis N)."""

    xy: np.ndarray  # (N, 2) point [m], field frame
    direction: np.ndarray  # (N,) direction of travel [rad], wrapped
    curvature: np.ndarray  # (N,) signed curvature [1/m], positive turning left
    curvature_rate: np.ndarray  # (N,) d curvature / ds [1/m^2]


def _unit(v: np.ndarray) -> np.ndarray:
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def _cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


def _left(t: np.ndarray) -> np.ndarray:
    return np.stack([-t[..., 1], t[..., 0]], axis=-1)


@dataclass(frozen=True, eq=False)
class Path:
    """A chain of quintic segments parameterised by arc length.

    Attributes
    ----------
    coeffs : ndarray, shape (S, 6, 2) — power-basis coefficients of ``P_i(u)``, [m]
    knot_s : ndarray, shape (S + 1,) — arc length at the joints [m], ``knot_s[0] == 0``
    breaks : ndarray, shape (S + 1,) bool — the direction of travel breaks at this joint
        (a cusp or a corner): the robot is at rest there
    sub_s : ndarray, shape (S * K + 1,) — arc length at K equal steps in ``u`` per segment
    sub_speed : ndarray, shape (S * K + 1, 2) — ``|P'|`` at the start and end of each step
    """

    coeffs: np.ndarray
    knot_s: np.ndarray
    breaks: np.ndarray
    sub_s: np.ndarray
    sub_speed: np.ndarray

    @classmethod
    def from_hermite(cls, p0, p1, d0, d1, dd0, dd1, *, breaks=None) -> Path:
        """Build a path from per-segment end data, each of shape (S, 2).

        ``p0, p1`` end points [m]; ``d0, d1`` first derivatives dP/du [m]; ``dd0, dd1``
        second derivatives [m]; ``breaks`` (S + 1,) bool marks joints where travel breaks.
        """
        data = np.stack([p0, d0, dd0, dd1, d1, p1], axis=1).astype(np.float64)  # (S, 6, 2)
        coeffs = np.einsum("kj,sjd->skd", _HERMITE, data)
        n = coeffs.shape[0]
        u = np.linspace(0.0, 1.0, _SUB + 1)
        nodes = (u[:-1, None] + _GX[None, :] / _SUB).ravel()  # (K * 8,)
        seg = np.repeat(np.arange(n), nodes.size)
        speed = np.linalg.norm(_poly(coeffs, seg, np.tile(nodes, n), 1), axis=1)
        steps = (speed.reshape(n, _SUB, 8) @ _GW) / _SUB  # (S, K) arc length of each step
        sub_s = np.concatenate([[0.0], np.cumsum(steps.ravel())])
        ends = np.linalg.norm(
            _poly(coeffs, np.repeat(np.arange(n), _SUB + 1), np.tile(u, n), 1), axis=1
        ).reshape(n, _SUB + 1)
        sub_speed = np.stack([ends[:, :-1].ravel(), ends[:, 1:].ravel()], axis=1)
        knot_s = sub_s[:: _SUB].copy()
        c = np.zeros(n + 1, dtype=bool) if breaks is None else np.asarray(breaks, dtype=bool)
        return cls(coeffs, knot_s, c, sub_s, sub_speed)

    @property
    def length(self) -> float:
        """Total arc length [m]."""
        return float(self.knot_s[-1])

    def locate(self, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Segment index and parameter of arc lengths ``s`` (clipped to the path).

        Returns
        -------
        seg : ndarray of int, shape (N,)
        u : ndarray, shape (N,) — in [0, 1]
        """
        s = np.clip(np.atleast_1d(np.asarray(s, dtype=np.float64)), 0.0, self.length)
        k = np.clip(np.searchsorted(self.sub_s, s, side="right") - 1, 0, len(self.sub_s) - 2)
        seg, step = k // _SUB, k % _SUB
        sa, sb = self.sub_s[k], self.sub_s[k + 1]
        h = np.maximum(sb - sa, 1e-300)
        x = (s - sa) / h
        # cubic Hermite for u(s) on the step, with du/ds = 1 / |P'| at both ends
        ma, mb = h / self.sub_speed[k, 0] * _SUB, h / self.sub_speed[k, 1] * _SUB
        x2, x3 = x * x, x * x * x
        w = (3 * x2 - 2 * x3) + (x3 - 2 * x2 + x) * ma + (x3 - x2) * mb
        ua = step / _SUB
        u = ua + w / _SUB
        # one Newton step on s(u) - s = 0, s(u) by Gauss-Legendre from the step start
        nodes = ua[:, None] + (u - ua)[:, None] * _GX[None, :]
        sp = np.linalg.norm(
            _poly(self.coeffs, np.repeat(seg, 8), nodes.ravel(), 1), axis=1
        ).reshape(-1, 8)
        s_u = sa + (u - ua) * (sp @ _GW)
        d1 = np.linalg.norm(_poly(self.coeffs, seg, u, 1), axis=1)
        u = np.clip(u - (s_u - s) / d1, 0.0, 1.0)
        return seg, u

    def evaluate(self, s: np.ndarray) -> PathSample:
        """Point, direction of travel, curvature and its rate at arc lengths ``s``.

        Parameters
        ----------
        s : ndarray, shape (N,) — arc length [m]; at a joint the later segment is used

        Returns
        -------
        PathSample
        """
        seg, u = self.locate(s)
        p = _poly(self.coeffs, seg, u, 0)
        d1 = _poly(self.coeffs, seg, u, 1)
        d2 = _poly(self.coeffs, seg, u, 2)
        d3 = _poly(self.coeffs, seg, u, 3)
        sp = np.linalg.norm(d1, axis=1)
        c12 = _cross(d1, d2)
        kappa = c12 / sp**3
        # d kappa / du = x'y''' - y'x''' over |P'|^3  -  3 (P' x P'')(P' . P'') / |P'|^5
        dk = _cross(d1, d3) / sp**3 - 3.0 * c12 * np.sum(d1 * d2, axis=1) / sp**5
        return PathSample(p, np.arctan2(d1[:, 1], d1[:, 0]), kappa, dk / sp)

    def grid(self, max_step: float) -> np.ndarray:
        """Arc lengths at most ``max_step`` apart that include every joint, shape (M,).

        Each segment is cut into equal steps (at least 4), so joints fall on the grid.
        """
        lengths = np.diff(self.knot_s)
        parts = np.maximum(np.ceil(lengths / max_step).astype(np.int64), 4)
        pieces = [a + (b - a) * np.arange(n) / n
                  for a, b, n in zip(self.knot_s[:-1], self.knot_s[1:], parts)]
        return np.concatenate([*pieces, self.knot_s[-1:]])

    @cached_property
    def _segments(self) -> np.ndarray:
        # the path every 5 mm (or finer), packed for the compiled projection
        s = self.grid(0.005)
        xy = self.evaluate(s).xy
        return segment_block(xy[:, 0], xy[:, 1], s)

    def project(
        self, points: np.ndarray, s_prev: np.ndarray, *, back: float = 0.05, ahead: float = 0.5
    ) -> tuple[np.ndarray, np.ndarray]:
        """Project points onto the path within a window that moves with progress.

        Only the part ``[s_prev - back, s_prev + ahead]`` is searched, so a path that comes
        back near itself does not make the projection jump to another pass.

        Parameters
        ----------
        points : ndarray, shape (N, 2) — x, y [m], field frame
        s_prev : ndarray, shape (N,) — arc length of the previous projection [m]
        back, ahead : float — window behind and ahead of ``s_prev`` [m]

        Returns
        -------
        s : ndarray, shape (N,) — arc length of the nearest point [m]
        cross_track : ndarray, shape (N,) — signed distance [m], positive left of travel
        """
        points = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 2)
        s_prev = np.ascontiguousarray(s_prev, dtype=np.float64).reshape(-1)
        s_out, d_out = np.empty(len(points)), np.empty(len(points))
        _project_kernel(self._segments, points, s_prev, back, ahead, s_out, d_out)
        return s_out, d_out


def _poly(coeffs: np.ndarray, seg: np.ndarray, u: np.ndarray, order: int) -> np.ndarray:
    """Derivative ``order`` of segments ``seg`` at ``u``, shape (N, 2) (Horner's rule)."""
    c = coeffs[seg]  # (N, 6, 2)
    k = np.arange(6)
    fact = np.ones(6)
    for m in range(order):
        fact = fact * np.maximum(k - m, 0)
    out = np.zeros((len(u), 2))
    for j in range(5, order - 1, -1):
        out = out * u[:, None] + c[:, j] * fact[j]
    return out


def spline_path(
    points: np.ndarray,
    *,
    directions: np.ndarray | None = None,
    cusp: np.ndarray | None = None,
    corner: np.ndarray | None = None,
    straight_tol: float = 1e-3,
    labels: Sequence[str] | None = None,
) -> Path:
    """Quintic Hermite spline through points, continuous in curvature at every joint.

    Parameters
    ----------
    points : ndarray, shape (P, 2) — x, y [m], field frame, P >= 2
    directions : ndarray, shape (P,), optional — direction of travel at each point [rad],
        NaN where it is to be chosen from the neighbours (see the module notes); at a cusp,
        the direction of arrival
    cusp : ndarray, shape (P,) bool, optional — travel reverses at this point (not the ends)
    corner : ndarray, shape (P,) bool, optional — travel may leave this point in another
        direction than it arrived (not the ends); both are chosen as at an end
    straight_tol : float — legs whose end directions lie this close to the chord [rad]
        become straight lines
    labels : sequence of str, optional — names of the points for error messages

    Returns
    -------
    Path

    Raises
    ------
    PlanError
        When two consecutive points coincide, the path would turn back on itself without a
        cusp, or a leg would loop (points too close for their directions).
    """
    pts = np.asarray(points, dtype=np.float64).reshape(-1, 2)
    n = len(pts)
    names = list(labels) if labels is not None else [f"point {i}" for i in range(n)]
    if n < 2:
        raise PlanError(f"spline_path: points must number at least 2, got {n}")
    given = np.full(n, np.nan) if directions is None else np.asarray(directions, dtype=float)
    cs = np.zeros(n, dtype=bool) if cusp is None else np.asarray(cusp, dtype=bool).copy()
    cs[0] = cs[-1] = False
    cn = np.zeros(n, dtype=bool) if corner is None else np.asarray(corner, dtype=bool).copy()
    cn[0] = cn[-1] = False
    cs &= ~cn
    chord = np.diff(pts, axis=0)
    length = np.linalg.norm(chord, axis=1)
    for i in np.flatnonzero(length < 1e-6):
        raise PlanError(f"route: {names[i + 1]} must differ from {names[i]}, got both at "
                        f"({pts[i, 0]:.3f}, {pts[i, 1]:.3f})")
    uc = chord / length[:, None]
    t_in = np.full((n, 2), np.nan)  # direction arriving at each point
    t_out = np.full((n, 2), np.nan)  # direction leaving it
    has = ~np.isnan(given)
    t_in[has] = np.stack([np.cos(given[has]), np.sin(given[has])], axis=1)
    t_out[has] = t_in[has]
    t_out[cs & has] *= -1.0
    for i in range(1, n - 1):
        if has[i] or cn[i]:
            continue
        if cs[i]:
            a = uc[i - 1] - uc[i]
            if np.linalg.norm(a) < 1e-9:
                raise PlanError(f"route: {names[i + 1]} must lie behind {names[i]} to back "
                                "up to it (reverse), got a point straight ahead")
            t_in[i] = _unit(a)
            t_out[i] = -t_in[i]
            continue
        t = uc[i - 1] * length[i] + uc[i] * length[i - 1]
        turn = np.degrees(np.arccos(np.clip(uc[i - 1] @ uc[i], -1.0, 1.0)))
        if turn > 175.0:  # the route doubles back: a cusp, not a curve
            raise PlanError(
                f"route: {names[i]} must not turn the path back on itself, got a {turn:.0f} deg "
                f"turn at ({pts[i, 0]:.3f}, {pts[i, 1]:.3f}), a cusp the chassis cannot "
                f"drive forwards; set reverse = true on {names[i + 1]} to back up")
        t_in[i] = t_out[i] = _unit(t)
    brk = cs | cn
    ends = [0, *np.flatnonzero(brk), n - 1]  # pieces run between breaks and the path's ends
    for a, b in zip(ends[:-1], ends[1:]):
        # a free end mirrors its neighbour's direction about the chord (circle-like end)
        if np.isnan(t_out[a, 0]):
            other = t_in[a + 1]
            u = uc[a]
            t_out[a] = u if np.isnan(other[0]) else 2.0 * (other @ u) * u - other
        if np.isnan(t_in[b, 0]):
            other = t_out[b - 1]
            u = uc[b - 1]
            t_in[b] = 2.0 * (other @ u) * u - other
    t_in[0], t_out[-1] = t_out[0], t_in[-1]
    # straight legs: both end directions along the chord
    ang0 = np.arctan2(_cross(uc, t_out[:-1]), np.sum(uc * t_out[:-1], axis=1))
    ang1 = np.arctan2(_cross(uc, t_in[1:]), np.sum(uc * t_in[1:], axis=1))
    straight = (np.abs(ang0) < straight_tol) & (np.abs(ang1) < straight_tol)
    for i in np.flatnonzero(straight):
        t_out[i] = uc[i]
        t_in[i + 1] = uc[i]
        if not brk[i]:
            t_in[i] = uc[i]
        if cs[i + 1]:
            t_out[i + 1] = -uc[i]
        elif not cn[i + 1]:
            t_out[i + 1] = uc[i]
    ang0 = np.where(straight, 0.0, ang0)
    ang1 = np.where(straight, 0.0, ang1)
    # curvature of the circle touching t at P and passing through Q: 2 (t x (Q - P)) / |Q - P|^2
    k_back = np.zeros(n)
    k_fwd = np.zeros(n)
    k_back[1:] = 2.0 * _cross(t_in[1:], -chord) / length**2
    k_fwd[:-1] = 2.0 * _cross(t_out[:-1], chord) / length**2
    k_in = k_back.copy()
    k_out = k_fwd.copy()
    inner = np.zeros(n, dtype=bool)
    inner[1:-1] = ~brk[1:-1]
    w_back, w_fwd = np.r_[0.0, length], np.r_[length, 0.0]  # each circle weighs its chord
    k_in[inner] = k_out[inner] = ((w_back * k_back + w_fwd * k_fwd)[inner]
                                  / (w_back + w_fwd)[inner])
    k_out[0], k_in[-1] = k_fwd[0], k_back[-1]
    flat = np.zeros(n, dtype=bool)
    flat[:-1] |= straight
    flat[1:] |= straight
    k_in[flat & ~brk] = k_out[flat & ~brk] = 0.0
    k_out[:-1][straight] = 0.0
    k_in[1:][straight] = 0.0
    # half the turn of the chord's circular arc (S-shaped legs, ang0 == ang1, have none)
    phi = np.minimum(0.5 * np.abs(ang1 - ang0), np.pi / 2)
    alpha = length * np.where(phi > 1e-8, phi / np.maximum(np.sin(phi), 1e-300), 1.0)
    a2 = (alpha**2)[:, None]
    path = Path.from_hermite(
        pts[:-1], pts[1:], alpha[:, None] * t_out[:-1], alpha[:, None] * t_in[1:],
        k_out[:-1, None] * a2 * _left(t_out[:-1]), k_in[1:, None] * a2 * _left(t_in[1:]),
        breaks=brk,
    )
    _check_loops(path, alpha, length, names)
    return path


def _check_loops(path: Path, alpha: np.ndarray, length: np.ndarray, names) -> None:
    """Raise when a leg folds (parameter speed near zero), loops (turns > 1.5 pi in all), or
    is short beside its neighbours (< 1/4 of one) and kinks (turns back and forth by more
    than pi beyond its net turn): its points are too close for their directions."""
    n = len(alpha)
    u = np.linspace(0.0, 1.0, 129)
    seg = np.repeat(np.arange(n), u.size)
    d1 = _poly(path.coeffs, seg, np.tile(u, n), 1).reshape(n, u.size, 2)
    speed = np.linalg.norm(d1, axis=2)
    heading = np.unwrap(np.arctan2(d1[..., 1], d1[..., 0]), axis=1)
    total = np.abs(np.diff(heading, axis=1)).sum(axis=1)
    net = np.abs(heading[:, -1] - heading[:, 0])
    nb = np.maximum(np.r_[0.0, length[:-1]], np.r_[length[1:], 0.0])
    short = length < 0.25 * nb
    bad = np.flatnonzero((speed.min(axis=1) < 0.05 * alpha) | (total > 1.5 * np.pi)
                        | (short & (total - net > np.pi)))
    if bad.size:
        near = np.unique(np.clip(np.concatenate([bad - 1, bad, bad + 1]), 0, n - 1))
        i = int(near[np.argmin(length[near])])  # the closest pair is the likeliest cause
        raise PlanError(
            f"route: {names[i + 1]} must be farther from {names[i]} or the headings there "
            f"changed, got {length[i]:.3f} m apart and a path that loops between them (it "
            f"turns {np.degrees(total[i]):.0f} deg); move the points apart, or change or drop "
            "a heading")
