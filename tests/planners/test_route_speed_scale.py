"""route.speed_scale time-scales the plan: the same path, c times faster."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from planners.errors import ScenarioError
from sim.planning import make_plan
from sim.scenario import load_scenario

HAIRPIN = Path(__file__).resolve().parents[2] / "scenarios" / "hairpin-skid.toml"


@pytest.mark.parametrize("c", [0.5, 0.8])
def test_a_scaled_plan_is_the_same_plan_driven_c_times_faster(c):
    # time scaling (Hollerbach, "Dynamic scaling of manipulator trajectories", 1984):
    # s_c(t) = s_1(c t), so v_c(t) = c v_1(c t) and the duration is T_1 / c, while no limit
    # the scale leaves alone (the wheels' free speed) binds; below c = 1 none does.
    one = make_plan(load_scenario(HAIRPIN))
    scaled = make_plan(load_scenario(HAIRPIN, [f"route.speed_scale={c}"]))
    assert scaled.duration == pytest.approx(one.duration / c, abs=2 * scaled.dt)
    t = np.linspace(0.0, one.duration, 400)
    speed_one = np.interp(t, one.t, np.hypot(one.velocity[:, 0], one.velocity[:, 1]))
    speed_c = np.interp(t / c, scaled.t, np.hypot(scaled.velocity[:, 0], scaled.velocity[:, 1]))
    np.testing.assert_allclose(speed_c, c * speed_one, atol=0.02)
    s_c = np.interp(t / c, scaled.t, scaled.s)
    np.testing.assert_allclose(s_c, np.interp(t, one.t, one.s), atol=0.02)
    assert scaled.notes["limits"]["max_speed"] == pytest.approx(c * 1.0)
    assert scaled.notes["limits"]["max_accel"] == pytest.approx(c * c * 1.5)


def test_speed_scale_must_be_positive():
    with pytest.raises(ScenarioError, match=r"route.speed_scale must be > 0 and <= 5, got 0"):
        load_scenario(HAIRPIN, ["route.speed_scale=0"])
