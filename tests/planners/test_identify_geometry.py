"""Track width from a spin-in-place log: synthetic logs and simulated spins.

The relation fitted is omega = r (w_r - w_l) / b (Lynch & Park, Modern Robotics, 2017,
§13.3), i.e. r (phi_r - phi_l) = b (psi - psi_0) for cumulative wheel angles phi and yaw psi.
"""

from __future__ import annotations

import argparse
import json

import numpy as np
import pytest

from planners.errors import LogError
from planners.identify_geometry import fit_track_width
from planners.log_writer import write_log
from planners.robot_log import read_log
from sim.identify_odometry import KINDS
from sim.log_recorder import run_logged
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario

R, B = 0.05, 0.43


def spin_log(path, *, b=B, noise=0.0, columns=("yaw",), seed=0, turns=2.0, meta=None):
    """A synthetic spin: 4 s, speed ramping up and down, IMU yaw with white noise [rad]."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 4.0, 801)
    yaw = 2 * np.pi * turns * (t / 4.0 - np.sin(2 * np.pi * t / 4.0) / (2 * np.pi))
    half = b * yaw / (2 * R)  # each wheel's shaft angle, opposite ways
    cols = {"position_left": ("rad", -half), "position_right": ("rad", half)}
    if "yaw" in columns:
        cols["yaw"] = ("rad", np.angle(np.exp(1j * (yaw + noise * rng.standard_normal(t.size)))))
    if "yaw_rate" in columns:
        cols["yaw_rate"] = ("rad/s", np.gradient(yaw, t))
    write_log(path, t, cols, meta={"wheel_radius": R, "track": 0.40, **(meta or {})})
    return read_log(path)


def test_synthetic_spin_recovers_the_track(tmp_path):
    log = spin_log(tmp_path / "spin.csv", noise=0.002)
    fit = fit_track_width(log)
    assert fit.track == pytest.approx(B, rel=1e-3)
    assert abs(fit.track - B) < 5 * fit.se  # SE is a lower bound; 5 SE leaves room
    assert fit.r2 > 0.9999 and fit.turn == pytest.approx(4 * np.pi, abs=0.01)
    assert fit.expansion == pytest.approx(B / 0.40, rel=1e-3)
    # the least-squares slope through the origin is sum(x y) / sum(x x) (numpy reference)
    x, y = fit.yaw, fit.differential
    assert fit.track == pytest.approx(float(x @ y / (x @ x)), rel=1e-12)


def test_integrated_yaw_rate_gives_the_same_track(tmp_path):
    fit = fit_track_width(spin_log(tmp_path / "rate.csv", columns=("yaw_rate",)))
    assert fit.yaw_source == "yaw_rate"
    assert fit.track == pytest.approx(B, rel=2e-3)  # trapezoid rule on a smooth rate


def test_per_side_radius_scale_from_the_metadata(tmp_path):
    log = spin_log(tmp_path / "s.csv", meta={"radius_scale": "1.02, 1.02"})
    assert fit_track_width(log).track == pytest.approx(B * 1.02, rel=1e-3)
    assert fit_track_width(log, wheel_radius=0.1).track == pytest.approx(2 * B * 1.02, rel=1e-3)


def simulated_spin(tmp_path, chassis: str):
    sc = load_scenario(bundled_dir("scenarios") / f"spin-{chassis}.toml")
    path = tmp_path / f"spin-{chassis}.csv"
    run_logged(Simulation(sc, runs=[0])).write(path)
    return sc, fit_track_width(read_log(path))


def test_simulated_differential_spin_gives_the_wheel_spacing(tmp_path):
    # two drive wheels on casters do not scrub: the effective track is the wheel spacing
    # (Lynch & Park 2017, §13.3); 1 % allows for wheel slip under the spin's torque
    sc, fit = simulated_spin(tmp_path, "differential")
    assert fit.track == pytest.approx(sc.robot.track, rel=0.01)
    assert abs(fit.turn) > 2 * np.pi


def test_simulated_skid_spin_gives_a_wider_effective_track(tmp_path):
    # Four wheels at (+-l/2, +-b/2) spinning about the centre slide sideways; with saturated
    # Coulomb friction and equal loads the yaw-moment balance of the wheel forces gives
    # b_eff = b + l^2 / b (derived here, no source). Mandow et al. 2007 measured such an
    # expansion on a real skid-steer robot (value from memory: of the order of 1.5).
    sc, fit = simulated_spin(tmp_path, "skid")
    b, l = sc.robot.track, sc.robot.wheelbase
    assert fit.expansion > 1.3
    assert fit.track == pytest.approx(b + l**2 / b, rel=0.03)


def test_bad_spin_logs_are_refused(tmp_path):
    with pytest.raises(LogError, match="spin must turn at least 180 deg for a track fit, got 90 deg"):
        fit_track_width(spin_log(tmp_path / "short.csv", turns=0.25))
    t = np.linspace(0, 1, 20)
    write_log(tmp_path / "noimu.csv", t, {"position_left": ("rad", t), "position_right": ("rad", -t)},
              meta={"wheel_radius": R})
    with pytest.raises(LogError, match=r"noimu\.csv: track width needs an IMU column 'yaw \[rad\]'"):
        fit_track_width(read_log(tmp_path / "noimu.csv"))
    write_log(tmp_path / "norad.csv", t, {"position_left": ("rad", t), "position_right": ("rad", -t),
                                          "yaw": ("rad", t)})
    with pytest.raises(LogError, match="needs the wheel radius: metadata '# wheel_radius = <m>'"):
        fit_track_width(read_log(tmp_path / "norad.csv"))
    with pytest.raises(LogError, match="metadata radius_scale must be two positive numbers 'left, right', got '1.02'"):
        fit_track_width(spin_log(tmp_path / "rs.csv", meta={"radius_scale": "1.02"}))
    flipped = spin_log(tmp_path / "flip.csv")
    flipped.columns["yaw"] = -flipped.columns["yaw"]
    with pytest.raises(LogError, match="track fit must be positive"):
        fit_track_width(flipped)
    cols = {f"position_{w}": ("rad", t) for w in ("fl", "fr", "rl", "rr")}
    write_log(tmp_path / "mec.csv", t, {**cols, "yaw": ("rad", t)}, meta={"wheel_radius": R})
    with pytest.raises(LogError, match="track width needs per-side wheel columns"):
        fit_track_width(read_log(tmp_path / "mec.csv"))


def test_track_width_handler_prints_one_json_object(tmp_path, capsys):
    spin_log(tmp_path / "spin.csv")
    args = argparse.Namespace(log=str(tmp_path / "spin.csv"), json=True, plot=str(tmp_path / "fit.png"))
    assert KINDS["track-width"](args) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["track_m"] == pytest.approx(B, rel=1e-3) and got["yaw_source"] == "yaw"
    assert (tmp_path / "fit.png").stat().st_size > 0


def _cli_kinds() -> dict:
    try:
        from sim.commands.identify import KINDS as cli_kinds
    except ImportError:
        return {}
    return cli_kinds


@pytest.mark.skipif("track-width" not in _cli_kinds(), reason="sim.commands.identify does not dispatch track-width yet")
def test_identify_command_line(tmp_path, capsys):
    from sim.cli import main

    spin_log(tmp_path / "spin.csv")
    assert main(["identify", "--kind", "track-width", str(tmp_path / "spin.csv"), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["track_m"] == pytest.approx(B, rel=1e-3)
    p = tmp_path / "umbmark.csv"
    p.write_text("# side = 4\n# track = 0.4\ndirection, run, err_x [m], err_y [m]\n"
                 "cw, 0, -0.30, -0.40\nccw, 0, 0.02, -0.02\n")
    assert main(["identify", "--kind", "odometry", str(tmp_path), "--json"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["track_scale"] > 1.0 and got["e_max_syst_after_m"] is None
