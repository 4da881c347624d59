"""Trapezoidal and S-curve phase times against the closed forms of Biagiotti & Melchiorri.

Source: L. Biagiotti, C. Melchiorri, *Trajectory Planning for Automatic Machines and
Robots*, Springer (2008), ch. 3: §3.2 (trapezoidal velocity profile with given initial and
final speeds) and §3.4 (trajectory with double S velocity profile: case 1 with a cruise
phase, case 2 without, and the case where the acceleration phase vanishes). The formulas
below are written out from the book independently of planners/profiles.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from planners.profiles import s_curve_profile, trapezoidal_profile

TOL = 1e-9  # seconds


def bm_trapezoid(h, vmax, amax, v0, v1):
    """B&M 2008 §3.2: (Ta, Tv, Td) for symmetric acceleration and braking."""
    if h * amax > vmax**2 - (v0**2 + v1**2) / 2:
        ta, td = (vmax - v0) / amax, (vmax - v1) / amax
        total = (h / vmax + vmax / (2 * amax) * (1 - v0 / vmax) ** 2
                 + vmax / (2 * amax) * (1 - v1 / vmax) ** 2)
        return ta, total - ta - td, td
    vlim = np.sqrt(h * amax + (v0**2 + v1**2) / 2)
    return (vlim - v0) / amax, 0.0, (vlim - v1) / amax


def bm_double_s(h, vmax, amax, jmax, v0, v1):
    """B&M 2008 §3.4, cases 1 and 2 (valid where no acceleration limit is lowered)."""
    # case 1: vlim = vmax
    if (vmax - v0) * jmax < amax**2:
        tj1 = np.sqrt((vmax - v0) / jmax)
        ta = 2 * tj1
    else:
        tj1 = amax / jmax
        ta = tj1 + (vmax - v0) / amax
    if (vmax - v1) * jmax < amax**2:
        tj2 = np.sqrt((vmax - v1) / jmax)
        td = 2 * tj2
    else:
        tj2 = amax / jmax
        td = tj2 + (vmax - v1) / amax
    tv = h / vmax - ta / 2 * (1 + v0 / vmax) - td / 2 * (1 + v1 / vmax)
    if tv > 0:
        return {"accel": ta, "cruise": tv, "decel": td, "accel_jerk": tj1, "decel_jerk": tj2}
    # case 2: no cruise, both accelerations reach amax
    tj = amax / jmax
    delta = amax**4 / jmax**2 + 2 * (v0**2 + v1**2) + amax * (4 * h - 2 * amax / jmax * (v0 + v1))
    ta = (amax**2 / jmax - 2 * v0 + np.sqrt(delta)) / (2 * amax)
    td = (amax**2 / jmax - 2 * v1 + np.sqrt(delta)) / (2 * amax)
    assert ta >= 2 * tj and td >= 2 * tj, "table case outside the closed form of case 2"
    return {"accel": ta, "cruise": 0.0, "decel": td, "accel_jerk": tj, "decel_jerk": tj}


TRAPEZOID_CASES = [
    # h, vmax, amax, v0, v1
    (10.0, 1.0, 2.0, 0.0, 0.0),  # cruise
    (0.2, 1.0, 2.0, 0.0, 0.0),  # triangular
    (3.0, 1.5, 1.0, 0.5, 0.2),  # cruise, non-zero ends
    (0.4, 1.5, 1.0, 0.5, 0.2),  # triangular, non-zero ends
    (1.0, 2.0, 3.0, 2.0, 0.0),  # starts at top speed
    (2.0, 1.0, 1.0, 1.0, 1.0),  # pure cruise
    (0.5, 1.0, 1.0, 0.0, 1.0),  # exactly reaches vmax at the end: accel only
]


@pytest.mark.parametrize("h, vmax, amax, v0, v1", TRAPEZOID_CASES)
def test_trapezoid_phase_times_equal_closed_form(h, vmax, amax, v0, v1):
    # Biagiotti & Melchiorri 2008, §3.2 (trapezoidal profile with initial/final speeds)
    p = trapezoidal_profile(h, max_speed=vmax, max_accel=amax, start_speed=v0, end_speed=v1)
    ta, tv, td = bm_trapezoid(h, vmax, amax, v0, v1)
    assert p.timings["accel"] == pytest.approx(ta, abs=TOL)
    assert p.timings["cruise"] == pytest.approx(tv, abs=TOL)
    assert p.timings["decel"] == pytest.approx(td, abs=TOL)
    assert p.duration == pytest.approx(ta + tv + td, abs=TOL)
    assert p.distance == pytest.approx(h, abs=1e-12)


@pytest.mark.parametrize("h, vmax, a, d, v0, v1", [
    (10.0, 1.0, 2.0, 0.5, 0.0, 0.0),
    (0.3, 1.0, 2.0, 0.5, 0.0, 0.0),
    (0.3, 1.0, 0.5, 3.0, 0.4, 0.1),
])
def test_trapezoid_asymmetric_closed_form(h, vmax, a, d, v0, v1):
    # derived from constant-acceleration kinematics (common practice, no source):
    # no cruise when (vmax^2 - v0^2)/2a + (vmax^2 - v1^2)/2d > h, then
    # vp^2 = (2 a d h + d v0^2 + a v1^2) / (a + d)
    p = trapezoidal_profile(h, max_speed=vmax, max_accel=a, max_decel=d,
                            start_speed=v0, end_speed=v1)
    ramp = (vmax**2 - v0**2) / (2 * a) + (vmax**2 - v1**2) / (2 * d)
    if ramp <= h:
        expected = (vmax - v0) / a + (vmax - v1) / d + (h - ramp) / vmax
    else:
        vp = np.sqrt((2 * a * d * h + d * v0**2 + a * v1**2) / (a + d))
        expected = (vp - v0) / a + (vp - v1) / d
    assert p.duration == pytest.approx(expected, abs=TOL)


S_CURVE_CASES = [
    # h, vmax, amax, jmax, v0, v1  (B&M case 1 and case 2)
    (10.0, 1.0, 1.0, 10.0, 0.0, 0.0),  # all seven phases
    (10.0, 1.0, 2.0, 3.0, 0.0, 0.0),  # cruise, amax never reached (Ta = 2 Tj)
    (10.0, 5.0, 10.0, 30.0, 1.0, 0.0),  # no cruise, v0 = 1, v1 = 0
    (10.0, 5.0, 10.0, 30.0, 2.0, 4.5),  # cruise, accel side without constant phase
    (0.1, 1.0, 1.0, 10.0, 0.0, 0.0),  # no cruise, both reach amax (case 2)
    (3.0, 5.0, 1.0, 10.0, 0.5, 0.2),  # no cruise, non-zero ends (case 2)
    (2.0, 1.0, 1.0, 1.0, 1.0, 1.0),  # pure cruise
]


@pytest.mark.parametrize("h, vmax, amax, jmax, v0, v1", S_CURVE_CASES)
def test_s_curve_phase_times_equal_closed_form(h, vmax, amax, jmax, v0, v1):
    # Biagiotti & Melchiorri 2008, §3.4 (double S), cases 1 and 2
    p = s_curve_profile(h, max_speed=vmax, max_accel=amax, max_jerk=jmax,
                        start_speed=v0, end_speed=v1)
    ref = bm_double_s(h, vmax, amax, jmax, v0, v1)
    for key, value in ref.items():
        if key.endswith("jerk") and ref["accel" if key == "accel_jerk" else "decel"] == 0.0:
            continue
        assert p.timings[key] == pytest.approx(value, abs=TOL), key
    assert p.duration == pytest.approx(ref["accel"] + ref["cruise"] + ref["decel"], abs=TOL)
    assert p.distance == pytest.approx(h, abs=1e-10)


@pytest.mark.parametrize("h, jmax", [(0.01, 10.0), (0.05, 2.0), (1e-4, 100.0)])
def test_s_curve_without_constant_phases_rest_to_rest(h, jmax):
    # B&M 2008 §3.4 phase relations with v0 = v1 = 0, no cruise and amax not reached:
    # four jerk phases of Tj, h = 2 jmax Tj^3, so T = 4 (h / (2 jmax))^(1/3)
    p = s_curve_profile(h, max_speed=10.0, max_accel=10.0, max_jerk=jmax)
    tj = (h / (2 * jmax)) ** (1 / 3)
    assert p.duration == pytest.approx(4 * tj, abs=TOL)
    assert p.timings["accel_jerk"] == pytest.approx(tj, abs=TOL)
    assert p.timings["cruise"] == 0.0


def test_s_curve_symmetric_moving_ends_without_constant_phases():
    # v0 = v1 = v, no cruise, amax not reached: h = 2 (v + vlim) Tj with vlim = v + j Tj^2,
    # i.e. 2 j Tj^3 + 4 v Tj - h = 0 (B&M 2008 §3.4 phase relations; cubic solved by numpy)
    v, j, h = 0.3, 5.0, 0.4
    p = s_curve_profile(h, max_speed=10.0, max_accel=10.0, max_jerk=j, start_speed=v,
                        end_speed=v)
    roots = np.roots([2 * j, 0.0, 4 * v, -h])
    tj = float(roots[np.argmin(np.abs(roots.imag))].real)
    assert p.duration == pytest.approx(4 * tj, abs=TOL)


def test_s_curve_short_braking_never_slower_than_the_book():
    # B&M 2008 §3.4: when their Ta < 0 they brake the whole way, Td = 2 h / (v0 + v1);
    # our exact peak speed must give a profile no longer than that, covering h exactly
    v0, v1, a, j, h = 1.0, 0.0, 1.0, 10.0, 0.56
    p = s_curve_profile(h, max_speed=2.0, max_accel=a, max_jerk=j, start_speed=v0,
                        end_speed=v1)
    assert p.duration <= 2 * h / (v0 + v1) + TOL
    assert p.distance == pytest.approx(h, abs=1e-12)
    t = np.linspace(0.0, p.duration, 2001)
    _, v, acc, _ = p.sample(t)
    assert np.all(np.abs(acc) <= a + 1e-12)
    assert np.all(v >= -1e-12)
