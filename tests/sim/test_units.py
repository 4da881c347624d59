"""Unit parsing: SI numbers, unit strings, and clear errors."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from planners.errors import ScenarioError, UnitError
from sim.units import format_quantity, to_si

# Exact conversion factors: NIST SP 811 (2008), App. B (1 in = 0.0254 m, 1 lb = 0.45359237 kg,
# g = 9.80665 m/s^2).
CASES = [
    ("18 in", "length", 0.4572),
    ("2 ft", "length", 0.6096),
    ("30 cm", "length", 0.30),
    ("5mm", "length", 0.005),
    ("90 deg", "angle", math.pi / 2),
    ("250 ms", "time", 0.25),
    ("30 Hz", "frequency", 30.0),
    ("6000 rpm", "angular_speed", 200 * math.pi),
    ("180 deg/s", "angular_speed", math.pi),
    ("12 in/s", "speed", 0.3048),
    ("1 g", "acceleration", 9.80665),
    ("10 lb", "mass", 4.5359237),
    ("500 g", "mass", 0.5),
    ("100 oz*in", "torque", 0.70616),
    ("2 N m", "torque", 2.0),
    ("350 mN*m", "torque", 0.35),
    ("1500 mA", "current", 1.5),
    ("25 mohm", "resistance", 0.025),
    ("5 %", "percent", 0.05),
    ("0.02 kg*m^2", "inertia", 0.02),
    ("1e-3 m", "length", 0.001),
]


@pytest.mark.parametrize("text,dim,si", CASES, ids=[c[0] for c in CASES])
def test_conversions(text, dim, si):
    assert to_si(text, dim) == pytest.approx(si, rel=1e-4)


def test_numbers_are_si():
    assert to_si(3, "length") == 3.0
    assert to_si(0.5, "angle") == 0.5


@pytest.mark.parametrize(
    "value,dim,match",
    [
        ("3 kg", "length", r"must be a length .* \(a mass\)"),
        ("3 parsecs", "length", "unknown unit 'parsecs'"),
        ("3 inn", "length", "did you mean in"),
        ("fast", "speed", "must be a speed"),
        (float("nan"), "length", "finite"),
        (float("inf"), "mass", "finite"),
        ("inf m", "length", "must be a length"),
        (True, "length", "must be a length"),
        ([1, 2], "length", "must be a length"),
    ],
)
def test_errors(value, dim, match):
    with pytest.raises(UnitError, match=match):
        to_si(value, dim, where="f.toml: robot.track")


def test_error_is_scenario_error_and_value_error():
    with pytest.raises(ScenarioError):
        to_si("1 s", "length")
    with pytest.raises(ValueError):
        to_si("1 s", "length")


@given(st.text(max_size=30))
def test_never_raises_anything_else(text):
    try:
        to_si(text, "length")
    except UnitError:
        pass


def test_format_quantity():
    assert format_quantity(0.0254, "length", "in") == "1 in"
