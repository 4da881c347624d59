"""`skidpad batch --sweep estimator.kind=...`: one summary row per estimator, fusion beats dead reckoning."""

from __future__ import annotations

import csv

from sim.cli import main

SHORT = "route.waypoint=[{at=[4.0, 0.7]}, {at=[6.5, 0.7]}, {at=[8.6, 1.0]}]"
KINDS = ("truth", "odometry", "kalman", "ekf", "particle")


def test_estimator_sweep_gives_one_row_per_estimator(tmp_path, capsys):
    code = main([
        "batch", "scenarios/greenhouse-drift.toml", "--sweep", "estimator.kind=" + ",".join(KINDS),
        "--runs", "3", "--out", str(tmp_path), "--no-progress", "--set", SHORT,
    ])
    assert code == 0
    assert "est rms" in capsys.readouterr().out
    with open(tmp_path / "summary.csv", newline="") as f:
        rows = {r["estimator.kind"]: r for r in csv.DictReader(f)}
    assert sorted(rows) == sorted(KINDS)
    assert all(int(r["failed"]) == 0 and int(r["n"]) == 3 for r in rows.values())
    err = {k: float(r["estimate_error_rms_m_mean"]) for k, r in rows.items()}
    # the truth estimator is the floor; fixes (2 cm, 10 Hz) beat encoders on the wet floor
    assert err["truth"] == 0.0
    assert 0.0 < err["ekf"] < 0.5 * err["odometry"]  # measured 1.5 cm vs 10.6 cm (3 runs)
    # NEES only where the method has a covariance
    assert rows["ekf"]["nees_mean_mean"] and not rows["odometry"]["nees_mean_mean"]
