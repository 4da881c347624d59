"""The drift stress test: per-source figures and outputs (the slip check is in tests/checks)."""

from __future__ import annotations

import csv

import numpy as np

from sim.cli import main
from sim.drift import drift_test
from sim.scenario import load_scenario


def test_drift_command_writes_csv_and_plot(tmp_path, capsys):
    out = tmp_path / "drift"
    args = ["drift", "scenarios/greenhouse-drift.toml", "--runs", "3", "--out", str(out),
            "--set", "route.waypoint=[{at=[4.0, 0.7]}, {at=[6.5, 0.7]}]"]
    assert main(args) == 0
    with open(out / "drift.csv") as f:
        rows = list(csv.DictReader(f))
    assert [r["source"] for r in rows] == ["encoders", "encoders+imu", "pods", "pods+imu"]
    for key in ("position_error_pct_mean", "position_error_pct_p95", "heading_drift_deg_per_min_mean"):
        assert all(float(r[key]) >= 0 for r in rows)
    assert (out / "drift.png").stat().st_size > 10_000


def test_drift_result_shapes():
    sc = load_scenario("scenarios/greenhouse-drift.toml", ["route.waypoint=[{at=[3.0, 0.7]}]"])
    res = drift_test(sc, 2)
    bins, err = res["growth"]["pods+imu"]
    assert err.shape[0] == 2 and bins.shape[0] == err.shape[1]
    assert np.all(res["distance_m"] > 1.5)
