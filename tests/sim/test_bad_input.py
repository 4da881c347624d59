"""Malformed scenario and field files: one clear line, exit code 2, no traceback."""

from __future__ import annotations

import copy
from pathlib import Path

import pytest
import tomli_w

from sim.cli import main
from sim.scenario import default_scenario_path, read_toml

FIELD = {
    "name": "test bay",
    "boundary": [[0, 0], [4, 0], [4, 3], [0, 3]],
    "obstacle": [{"polygon": [[2.0, 2.0], [2.4, 2.0], [2.4, 2.4], [2.0, 2.4]]}],
    "landmark": [{"id": 1, "at": [0, 1.5]}],
}

SCENARIO = {
    "title": "bad-input base",
    "field": "field.toml",
    "robot": {
        "chassis": "skid",
        "mass": "10 kg",
        "footprint": ["40 cm", "36 cm"],
        "wheel_radius": "5 cm",
        "track": "32 cm",
        "wheelbase": "30 cm",
        "gear_ratio": 12.0,
        "motor": {"free_speed": "5500 rpm", "stall_torque": "0.4 N*m", "stall_current": "20 A", "free_current": "1 A"},
        "battery": {"voltage": "12 V", "resistance": "20 mohm"},
    },
    "route": {
        "start": [0.5, 0.5, 0.0],
        "max_speed": 1.0,
        "max_accel": 1.0,
        "waypoint": [{"at": [2.0, 0.8]}, {"at": [3.2, 1.6]}],
    },
    "tracker": {"kind": "pure-pursuit"},
    "estimator": {"kind": "truth"},
}


def _set(doc: dict, key: str, value) -> dict:
    doc = copy.deepcopy(doc)
    node = doc
    parts = key.split(".")
    for p in parts[:-1]:
        node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
    if value is _DELETE:
        del node[parts[-1]]
    else:
        node[parts[-1]] = value
    return doc


_DELETE = object()

# (id, key to change, new value, fragments the one-line message must contain)
CASES = [
    ("unknown-top-key", "robots", {}, ["robots: unknown key", "did you mean robot?"]),
    ("misspelled-key", "robot.mas", 3, ["robot.mas: unknown key", "did you mean robot.mass?"]),
    ("wrong-dimension", "robot.track", "3 kg", ["robot.track must be a length", "'3 kg'", "a mass"]),
    ("negative-mass", "robot.mass", -2.0, ["robot.mass must be > 0", "-2.0"]),
    ("zero-mass", "robot.mass", 0, ["robot.mass must be > 0"]),
    ("zero-wheel-radius", "robot.wheel_radius", 0.0, ["robot.wheel_radius must be > 0"]),
    ("nan", "robot.mass", float("nan"), ["robot.mass must be a finite mass"]),
    ("inf", "route.max_speed", float("inf"), ["route.max_speed must be a finite speed"]),
    ("string-for-number", "robot.gear_ratio", "fast", ["robot.gear_ratio must be a number", "'fast'"]),
    ("unknown-chassis", "robot.chassis", "omni", ["robot.chassis must be one of", "'mecanum'", "'omni'"]),
    ("unknown-tracker", "tracker.kind", "pure-persuit", ["tracker.kind must be one of", "did you mean pure-pursuit?"]),
    ("unknown-estimator", "estimator.kind", "truht", ["estimator.kind must be one of", "did you mean truth?"]),
    ("waypoint-outside", "route.waypoint.1.at", [5.0, 1.0], ["route.waypoint[1].at must lie on the free floor", "outside"]),
    ("waypoint-in-obstacle", "route.waypoint.1.at", [2.2, 2.2], ["route.waypoint[1].at", "inside obstacle 1"]),
    ("identical-waypoints", "route.waypoint.1.at", [2.0, 0.8], ["route.waypoint[1].at must differ"]),
    ("start-overlaps-wall", "route.start", [0.1, 0.5, 0.0], ["route.start", "footprint is outside the field"]),
    ("hold-on-skid", "route.heading", "hold", ["route.heading must be 'tangent' for a skid chassis"]),
    ("missing-field-file", "field", "nowhere.toml", ["field: file not found", "nowhere.toml"]),
    ("empty-route", "route.waypoint", [], ["route.waypoint must hold at least one"]),
    ("zero-speed-cap", "route.waypoint.0.speed", 0.0, ["route.waypoint[0].speed must be > 0"]),
    ("free-current-above-stall", "robot.motor.free_current", "25 A", ["robot.motor.free_current must be below"]),
    ("five-wheel-skid", "robot.wheels", 5, ["robot.wheels must be 4 or 6 for a skid chassis"]),
    ("footprint-one-value", "robot.footprint", [0.4], ["robot.footprint must be a list of 2 values"]),
    ("mu-too-large", "robot.traction", {"mu": 7.0}, ["robot.traction.mu must be > 0 and <= 3"]),
    ("rate-wrong-unit", "run", {"rate": "200 m"}, ["run.rate must be a frequency", "a length"]),
    ("vary-unknown-key", "run", {"vary": {"mas": "5 %"}}, ["run.vary.mas: unknown robot key", "did you mean mass?"]),
    ("missing-robot-key", "robot.mass", _DELETE, ["robot.mass: missing key"]),
    ("bad-choice-type", "robot.idle", 3, ["robot.idle must be one of"]),
    ("control-unknown-key", "control", {"kpp": 1.0}, ["control.kpp: unknown key"]),
    ("table-for-value", "robot.mass", {"a": 1}, ["robot.mass must be a mass"]),
]


def _write(tmp: Path, doc: dict | None = None, field: dict | None = None) -> Path:
    (tmp / "field.toml").write_bytes(tomli_w.dumps(field or FIELD).encode())
    path = tmp / "scenario.toml"
    path.write_bytes(tomli_w.dumps(doc if doc is not None else SCENARIO).encode())
    return path


def _check(capsys, path: Path) -> str:
    code = main(["check", str(path)])
    out = capsys.readouterr()
    assert code == 2, out
    lines = out.err.strip().splitlines()
    assert len(lines) == 1, out.err
    assert "Traceback" not in out.err
    return lines[0]


def test_base_is_valid(tmp_path, capsys):
    assert main(["check", str(_write(tmp_path))]) == 0
    assert "skid chassis" in capsys.readouterr().out


@pytest.mark.parametrize("name,key,value,fragments", CASES, ids=[c[0] for c in CASES])
def test_bad_scenario(tmp_path, capsys, name, key, value, fragments):
    path = _write(tmp_path, _set(SCENARIO, key, value))
    line = _check(capsys, path)
    assert str(path) in line
    for frag in fragments:
        assert frag in line, line


FIELD_CASES = [
    ("bow-tie-boundary", "boundary", [[0, 0], [4, 3], [4, 0], [0, 3]], ["boundary must be a simple polygon"]),
    ("two-point-boundary", "boundary", [[0, 0], [4, 0]], ["boundary must be a list of at least 3"]),
    ("field-unknown-key", "tiles", "1 m", ["tiles: unknown key", "did you mean tile?"]),
    ("landmark-outside", "landmark", [{"id": 1, "at": [9, 9]}], ["landmark[0].at must lie inside"]),
    ("obstacle-bad-unit", "obstacle", [{"polygon": [[1, 1], ["2 kg", 1], [2, 2]]}], ["obstacle[0].polygon[1][0] must be a length"]),
]


@pytest.mark.parametrize("name,key,value,fragments", FIELD_CASES, ids=[c[0] for c in FIELD_CASES])
def test_bad_field(tmp_path, capsys, name, key, value, fragments):
    _write(tmp_path, field=_set(FIELD, key, value))
    line = _check(capsys, tmp_path / "field.toml")
    assert str(tmp_path / "field.toml") in line
    for frag in fragments:
        assert frag in line, line


def test_field_error_reached_through_scenario(tmp_path, capsys):
    path = _write(tmp_path, field=_set(FIELD, "boundary", [[0, 0], [4, 3], [4, 0], [0, 3]]))
    line = _check(capsys, path)
    assert "field.toml: boundary must be a simple polygon" in line


def test_toml_syntax_error_names_line(tmp_path, capsys):
    path = tmp_path / "broken.toml"
    path.write_text('title = "x"\n[robot\nmass = 3\n')
    line = _check(capsys, path)
    assert "TOML syntax error" in line and "line 2" in line and str(path) in line


def test_non_utf8_file(tmp_path, capsys):
    path = tmp_path / "latin1.toml"
    path.write_bytes('title = "caf\xe9"\n'.encode("latin-1"))
    line = _check(capsys, path)
    assert "not UTF-8" in line and str(path) in line


def test_huge_file_refused_before_reading(tmp_path, capsys, monkeypatch):
    path = tmp_path / "huge.toml"
    with open(path, "wb") as f:
        f.truncate(50 * 1024 * 1024)

    def no_read(self):
        raise AssertionError("a 50 MB file must be refused from its size, unread")

    monkeypatch.setattr(Path, "read_bytes", no_read)
    line = _check(capsys, path)
    assert "50.0 MiB" in line and "must be under 1 MiB" in line


def test_missing_file(tmp_path, capsys):
    line = _check(capsys, tmp_path / "absent.toml")
    assert "absent.toml: cannot read file" in line


def test_every_case_has_distinct_key():
    assert len(CASES) + len(FIELD_CASES) + 5 >= 25


def test_bundled_default_is_valid(capsys):
    assert read_toml(default_scenario_path())["title"]
    assert main(["check", str(default_scenario_path())]) == 0


def test_route_that_cannot_be_driven_is_reported_by_check(tmp_path, capsys):
    # the waypoints are on the floor, but the smoothed path passes closer to the south wall
    # than half the robot's width
    path = _write(tmp_path, _set(SCENARIO, "route.waypoint.1.at", [3.5, 0.12]))
    line = _check(capsys, path)
    assert "smoothed path must keep" in line and "from walls and obstacles" in line
