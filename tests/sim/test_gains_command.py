"""``skidpad gains``: prints the gains, writes a fragment the loader accepts, rejects bad input."""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pytest
import tomli_w

from planners.estimators.kalman import HeadingKalman
from sim.cli import SAFETY, main
from sim.runner import Simulation
from sim.scenario import bundled_dir, load_scenario

SCENARIOS = bundled_dir("scenarios")
WORKSHOP = SCENARIOS / "workshop-loop.toml"


def _gains(capsys, *args: str) -> tuple[int, str, str]:
    code = main(["gains", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def _comment_text(text: str) -> str:
    lines = [ln[2:] for ln in text.splitlines() if ln.startswith("# ")]
    return " ".join(" ".join(lines).split())


def _paste(base, fragment: dict, folder):
    """A copy of the scenario ``base`` with the fragment's tables in place of its own."""
    doc = tomllib.loads(base.read_text())
    doc.update(fragment)
    doc["field"] = str((base.parent / doc["field"]).resolve())
    path = folder / f"pasted-{base.name}"
    path.write_text(tomli_w.dumps(doc))
    return path


@pytest.mark.parametrize(
    "name,tracker,measure",
    [("workshop-loop", "holonomic", "odometry"), ("figure-eight-skid", "unicycle", "odometry"),
     ("greenhouse-drift", None, "fixes")],
)
def test_fragment_pastes_into_a_scenario_and_runs(tmp_path, capsys, name, tracker, measure):
    source = SCENARIOS / f"{name}.toml"
    out = tmp_path / "gains.toml"
    code, stdout, _ = _gains(capsys, source, "--out", out)
    assert code == 0
    assert SAFETY in stdout and f"wrote {out}" in stdout
    text = out.read_text()
    assert SAFETY in _comment_text(text)
    fragment = tomllib.loads(text)
    assert set(fragment) == {"control", "tracker", "estimator"}
    if tracker is not None:
        assert fragment["tracker"]["kind"] == tracker
    assert fragment["estimator"]["kind"] == "kalman" and fragment["estimator"]["measure"] == measure

    # the fragment's [control] is what a run of the original scenario resolves
    original = Simulation(load_scenario(source)).wheels.gains
    for key in ("kS", "kV", "kA", "kP", "kI"):
        np.testing.assert_allclose(original[key], fragment["control"][key], rtol=1e-5)
        assert f"{key} {fragment['control'][key]:.4g}" in stdout

    pasted = load_scenario(_paste(source, fragment, tmp_path))
    sim = Simulation(pasted)
    for key in ("kP", "kI"):
        np.testing.assert_allclose(sim.wheels.gains[key], fragment["control"][key], rtol=1e-12)
    designed = ("zeta", "b") if fragment["tracker"]["kind"] == "unicycle" else ("bandwidth", "heading_bandwidth")
    for key in designed:
        assert sim.tracker.params[key] == fragment["tracker"][key]
    assert isinstance(sim.estimator, HeadingKalman)
    for _ in range(100):
        sim.step()
    assert np.all(np.isfinite(sim.world.pose)) and np.all(np.isfinite(sim.estimate))
    assert sim.k == 100


def test_printed_figures_follow_the_options(capsys):
    code, stdout, _ = _gains(capsys, WORKSHOP, "--bandwidth", "0.5 Hz", "--damping", "0.8", "--speed", "1 m/s")
    assert code == 0
    fragment = tomllib.loads(stdout[stdout.index("# skidpad gains"):stdout.rindex(SAFETY)])
    k = 2 * math.pi * 0.5
    assert fragment["tracker"] == {"kind": "holonomic", "bandwidth": pytest.approx(k, rel=1e-6),
                                   "heading_bandwidth": pytest.approx(k, rel=1e-6)}
    # the unicycle alternative for the same natural frequency at 1 m/s: b = (2 pi 0.5)^2 / 1^2
    assert f"zeta = 0.8, b = {k * k:.4g} 1/m^2" in stdout
    assert "Bryson's weights Q = 1/(" in stdout and "SIMC" in stdout


def test_given_control_constants_are_kept(capsys):
    code, stdout, _ = _gains(capsys, WORKSHOP, "--set", "control.kP=0.5", "--set", "control.kS=0.3")
    assert code == 0
    fragment = tomllib.loads(stdout[stdout.index("# skidpad gains"):stdout.rindex(SAFETY)])
    assert fragment["control"]["kP"] == 0.5 and fragment["control"]["kS"] == 0.3
    # kS given, kV and kA from the motor
    assert "kS 0.3 V ([control]), kV " in stdout and "V s/rad (motor datasheet), kA" in stdout
    assert "kP 0.5 V s/rad ([control]; given)" in stdout


@pytest.mark.parametrize(
    "args,fragments",
    [
        (["--damping", "-0.5"], ["--damping must be in (0, 1)", "got -0.5"]),
        (["--damping", "1.2"], ["--damping must be in (0, 1)", "got 1.2"]),
        (["--bandwidth", "fast"], ["--bandwidth must be a positive number", "'fast'"]),
        (["--bandwidth", "-2"], ["--bandwidth must be a positive number", "'-2'"]),
        (["--set", "robot.mas=3"], ["robot.mas", "did you mean robot.mass?"]),
        (["--speed", "2 kg"], ["--speed"]),
    ],
    ids=["negative-damping", "damping-above-one", "bandwidth-word", "negative-bandwidth",
         "unknown-key", "speed-unit"],
)
def test_bad_input_is_one_line_with_exit_code_2(capsys, args, fragments):
    code, _, stderr = _gains(capsys, WORKSHOP, *args)
    assert code == 2
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("skidpad gains: ")
    for f in fragments:
        assert f in lines[0]
    assert "Traceback" not in stderr


def test_help_carries_the_safety_caution(capsys):
    with pytest.raises(SystemExit):
        main(["gains", "--help"])
    assert " ".join(SAFETY.split()) in " ".join(capsys.readouterr().out.split())


def test_identified_constants_round_trip_into_the_gains(tmp_path, capsys):
    """identify --json -> gains --constants: the fragment's kS, kV, kA are the fitted ones and
    kP, kI are designed from them."""
    import json

    from planners.control import WheelController
    from tests.planners.ff_logs import KA, KS, KV, STEPS, write_ff_log

    log = write_ff_log(tmp_path / "steps.csv", STEPS)
    assert main(["identify", "--kind", "feedforward", str(log), "--json", "--no-plot"]) == 0
    constants = tmp_path / "ff.json"
    constants.write_text(capsys.readouterr().out)
    fitted = json.loads(constants.read_text())
    assert (fitted["kS"], fitted["kV"], fitted["kA"]) == pytest.approx((KS, KV, KA), rel=0.01)

    source = SCENARIOS / "figure-eight-skid.toml"
    code, stdout, _ = _gains(capsys, source, "--constants", constants)
    assert code == 0
    fragment = tomllib.loads(stdout[stdout.index("# skidpad gains"):stdout.rindex(SAFETY)])
    for key in ("kS", "kV", "kA"):
        assert fragment["control"][key] == pytest.approx(fitted[key], rel=1e-6)  # written to 6 digits
    assert "feedforward (identified, ff.json)" in stdout
    assert "[control] kS, kV, kA: identified, ff.json." in _comment_text(stdout)
    sc = load_scenario(source)
    ctl = WheelController(wheels=sc.robot.wheel_count, dt=1.0 / sc.run.rate, voltage=sc.robot.battery.voltage,
                          kS=fitted["kS"], kV=fitted["kV"], kA=fitted["kA"])
    for key in ("kP", "kI"):
        assert fragment["control"][key] == pytest.approx(float(np.ravel(ctl.gains[key])[0]), rel=1e-5)
    motor = Simulation(sc).wheels.gains  # the datasheet's constants differ: the file was used
    assert abs(fragment["control"]["kV"] - float(np.ravel(motor["kV"])[0])) > 0.001


@pytest.mark.parametrize(
    "text,fragment",
    [
        ("not json", "must be the JSON object `skidpad identify --kind feedforward --json` prints; not JSON"),
        ("[1, 2]", "must be a JSON object with keys kS, kV, kA, got [1, 2]"),
        ('{"kS": 0.2, "kV": 0.3}', "kA must be a number > 0 [V s^2/rad], missing"),
        ('{"kS": 0.2, "kV": "fast", "kA": 0.02}', "kV must be a number > 0 [V s/rad], got 'fast'"),
        ('{"kS": -0.1, "kV": 0.3, "kA": 0.02}', "kS must be a number >= 0 [V], got -0.1"),
    ],
    ids=["text", "list", "missing", "string", "negative"],
)
def test_bad_constants_file_is_one_line(tmp_path, capsys, text, fragment):
    path = tmp_path / "c.json"
    path.write_text(text)
    code, _, stderr = _gains(capsys, WORKSHOP, "--constants", path)
    lines = stderr.strip().splitlines()
    assert code == 2 and len(lines) == 1 and lines[0].startswith(f"skidpad gains: {path}: {fragment}")


def test_constants_of_a_fit_that_could_not_separate_ka_carry_a_note(tmp_path, capsys):
    path = tmp_path / "c.json"
    path.write_text('{"kS": 0.2, "kV": 0.3, "kA": 0.02, "ka_separable": false}')
    code, stdout, _ = _gains(capsys, WORKSHOP, "--constants", path)
    assert code == 0 and "says kA was not separable" in stdout
