"""The traction curves: the smooth sign, the magic formula's slope, the friction circle."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sim.traction import _magic, saturate, wheel_force

XS = np.linspace(-6.0, 6.0, 24001)


def test_saturate_is_a_smooth_monotone_sign_close_to_tanh():
    values = np.array([saturate(x)[0] for x in XS])
    slopes = np.array([saturate(x)[1] for x in XS])
    assert saturate(0.0) == (0.0, 1.0)
    assert np.all(np.diff(values) >= 0.0)  # monotone
    assert np.all(np.abs(values) <= 1.0)
    assert np.all(values[np.abs(XS) >= 3.0] == np.sign(XS[np.abs(XS) >= 3.0]))
    # the slope is the derivative (central differences) and is continuous through |x| = 3
    numeric = np.gradient(values, XS)
    np.testing.assert_allclose(slopes[1:-1], numeric[1:-1], atol=2e-6)
    assert saturate(3.0 - 1e-9)[1] == pytest.approx(0.0, abs=1e-9)
    # a stand-in for tanh: within 0.024 of it everywhere, the same slope at 0
    assert np.max(np.abs(values - np.tanh(XS))) < 0.024
    assert saturate(1e-4)[0] == pytest.approx(math.tanh(1e-4), rel=1e-8)


@settings(deadline=None)  # the first example includes compiling the kernel
@given(st.floats(-50, 50), st.floats(0.01, 5.0), st.floats(0.01, 5.0))
def test_magic_formula_slope_is_its_derivative(s, vnorm, b):
    c, e = 1.9, 0.97
    h = 1e-6 * max(vnorm, 1.0)
    up = _magic(s + h, vnorm, b, c, e)[0]
    down = _magic(s - h, vnorm, b, c, e)[0]
    assert _magic(s, vnorm, b, c, e)[1] == pytest.approx((up - down) / (2 * h), rel=1e-4, abs=1e-6)


@pytest.mark.parametrize("model", [0, 1])
@settings(deadline=None)
@given(
    vx=st.floats(-3, 3), vy=st.floats(-3, 3), rim=st.floats(-3, 3),
    mecanum=st.booleans(),
)
def test_force_stays_inside_the_friction_circle(model, vx, vy, rim, mecanum):
    # Coulomb friction (common practice, no source): grip plus rolling resistance never
    # exceed (mu + crr) load; a mecanum wheel's grip acts along g only.
    g = (1 / math.sqrt(2), 1 / math.sqrt(2), 1 / math.sqrt(2)) if mecanum else (1.0, 0.0, 1.0)
    mu, load, crr, roller = 0.8, 30.0, 0.01, 0.02
    fx, fy, fg, k, slip = wheel_force(vx, vy, rim, *g, mu, load, 0.05, crr, roller, model, 10.0, 1.9, 0.97)
    limit = (mu + crr + (roller if mecanum else 0.0)) * load
    assert math.hypot(fx, fy) <= limit * (1 + 1e-12)
    assert abs(fg) <= mu * load * (1 + 1e-12)
    assert k >= 0.0 and slip >= 0.0
