"""Estimators inside full runs: fusion with fixes beats dead reckoning on a slippery floor."""

from __future__ import annotations

import pytest

from sim.runner import Simulation
from sim.scenario import load_scenario

SHORT = ["route.waypoint=[{at=[4.0, 0.7]}, {at=[6.5, 0.7]}, {at=[8.6, 1.0]}]"]


def _error(kind: str, source: str = "encoders") -> dict:
    sc = load_scenario("scenarios/greenhouse-drift.toml", [*SHORT, f'estimator={{kind="{kind}", source="{source}"}}'])
    cards = [r.scorecard for r in Simulation(sc, runs=[0, 1]).run()]
    return {k: sum(c[k] for c in cards) / 2 for k in ("estimate_error_rms_m", "estimate_error_max_m")}


def test_ekf_with_fixes_beats_encoder_odometry():
    odo = _error("odometry")
    ekf = _error("ekf")
    assert ekf["estimate_error_rms_m"] < 0.5 * odo["estimate_error_rms_m"]


@pytest.mark.parametrize("kind", ["ekf", "particle"])
def test_nees_reported_for_methods_with_covariance(kind):
    sc = load_scenario("scenarios/greenhouse-drift.toml", [*SHORT, f'estimator={{kind="{kind}", source="encoders+imu"}}'])
    card = Simulation(sc, runs=[0]).run()[0].scorecard
    assert isinstance(card["nees_mean"], float) and card["nees_mean"] > 0
