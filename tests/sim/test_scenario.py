"""Scenario loading: units to SI, defaults, overrides, and the loader's error contract."""

from __future__ import annotations

import copy
import math
import tomllib

import pytest
import tomli_w
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planners.errors import ScenarioError
from sim.scenario import bundled_scenarios, load_scenario, parse_override
from tests.sim.test_bad_input import FIELD, SCENARIO, _write


def test_units_become_si(tmp_path):
    sc = load_scenario(_write(tmp_path))
    assert sc.robot.mass == 10.0
    assert sc.robot.footprint == pytest.approx((0.40, 0.36))
    assert sc.robot.motor.free_speed == pytest.approx(5500 * 2 * math.pi / 60)
    assert sc.robot.battery.resistance == pytest.approx(0.02)
    assert sc.robot.wheel_count == 4
    assert sc.route.decel == 1.0  # max_decel defaults to max_accel
    assert sc.run.rate == 200.0 and sc.run.seed == 1


def test_overrides_are_validated(tmp_path):
    path = _write(tmp_path)
    sc = load_scenario(path, ['robot.mass="12 kg"', "route.waypoint.0.speed=0.5", "run.seed=7"])
    assert sc.robot.mass == 12.0
    assert sc.route.waypoints[0].speed == 0.5
    assert sc.run.seed == 7
    assert sc.document["robot"]["mass"] == "12 kg"
    with pytest.raises(ScenarioError, match=r"\(with --set\): robot.mas: unknown key \(did you mean robot.mass\?\)"):
        load_scenario(path, ["robot.mas=3"])
    with pytest.raises(ScenarioError, match="robot.mass must be > 0"):
        load_scenario(path, ["robot.mass=-1"])
    with pytest.raises(ScenarioError, match="index 9 must be below 2"):
        load_scenario(path, ["route.waypoint.9.speed=1"])
    with pytest.raises(ScenarioError, match="must look like key=value"):
        parse_override("robot.mass")


def test_unquoted_override_value_is_a_string():
    assert parse_override("tracker.lookahead=0.3 m") == ("tracker.lookahead", "0.3 m")
    assert parse_override("run.seed=4") == ("run.seed", 4)


def test_vary_forms(tmp_path):
    doc = copy.deepcopy(SCENARIO)
    doc["run"] = {"vary": {"mass": "5 %", "traction.mu": [0.6, 0.9]}}
    sc = load_scenario(_write(tmp_path, doc))
    by_key = {v.key: v for v in sc.run.vary}
    assert by_key["mass"].relative == pytest.approx(0.05)
    assert by_key["traction.mu"].draw(0.8, 0.5) == pytest.approx(0.75)
    assert by_key["mass"].draw(10.0, 1.0) == pytest.approx(10.5)


@pytest.mark.parametrize("path", bundled_scenarios(), ids=lambda p: p.name)
def test_bundled_scenarios_load(path):
    sc = load_scenario(path)
    assert sc.route.waypoints or sc.tracker.kind == "voltage-script"


# ------------------------------------------------------------------ hypothesis: never crash

toml_scalars = st.one_of(
    st.integers(-10, 10), st.floats(allow_nan=True), st.booleans(), st.text(max_size=8),
    st.sampled_from(["3 kg", "0.5 m", "90 deg", "-1 m/s", "12 V", "omni", "skid", "truth"]),
)
toml_values = st.recursive(
    toml_scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.text(max_size=6), inner, max_size=4)),
    max_leaves=12,
)


def _paths(doc, prefix=()):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield prefix + (k,)
            yield from _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield prefix + (i,)
            yield from _paths(v, prefix + (i,))


ALL_PATHS = list(_paths(SCENARIO))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.sampled_from(ALL_PATHS), toml_values, st.booleans())
def test_mutations_raise_only_scenario_error(tmp_path, where, value, delete):
    doc = copy.deepcopy(SCENARIO)
    node = doc
    for p in where[:-1]:
        node = node[p]
    if delete and isinstance(node, dict):
        del node[where[-1]]
    else:
        node[where[-1]] = value
    try:
        text = tomli_w.dumps(doc)
    except (TypeError, ValueError):
        return  # not representable in TOML
    (tmp_path / "field.toml").write_bytes(tomli_w.dumps(FIELD).encode())
    path = tmp_path / "m.toml"
    path.write_text(text)
    try:
        load_scenario(path)
    except ScenarioError:
        pass


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.dictionaries(st.text(max_size=8), toml_values, max_size=6))
def test_random_documents_raise_only_scenario_error(tmp_path, doc):
    try:
        text = tomli_w.dumps(doc)
        tomllib.loads(text)
    except (TypeError, ValueError):
        return
    path = tmp_path / "r.toml"
    path.write_text(text)
    try:
        load_scenario(path)
    except ScenarioError:
        pass
