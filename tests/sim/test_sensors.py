"""Sensor models: shapes, determinism, batch = alone, each sensor's error terms, config."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from planners.errors import ScenarioError
from planners.se2 import compose, exp
from sim.config_sensors import Encoders, Fixes, Imu, Pod, RangeSensor, SensorSuite
from sim.field import Field, Landmark
from sim.schema import read_table
from sim.sensors import Sensors
from sim.units import UNITS

DT = 0.01


def floor_field() -> Field:
    return Field(
        name="workshop floor",
        boundary=np.array([[0, 0], [4, 0], [4, 4], [0, 4.0]]),
        obstacles=(np.array([[2.6, 1.8], [3.0, 1.8], [3.0, 2.2], [2.6, 2.2]]),),
        landmarks=(Landmark(id=1, at=(4.0, 2.0)), Landmark(id=2, at=(0.0, 2.0))),
    )


NOISY = SensorSuite(
    encoders=Encoders(counts_per_rev=537.6, noise=0.7),
    pods=(
        Pod(at=(0.0, 0.15), radius=0.024, counts_per_rev=2000, noise=0.5, skip=0.02, scale_error=0.01),
        Pod(at=(-0.1, 0.0), direction=np.pi / 2, radius=0.024, counts_per_rev=2000),
    ),
    imu=Imu(rate_noise=0.003, bias_walk=1e-4, bias=0.01, scale_error=0.002),
    fixes=Fixes(rate=20.0, latency=0.05, dropout=0.2, fov=np.radians(120)),
    range=(RangeSensor(at=(0.2, 0.0), max_range=3.0, sigma=0.01, rate=50.0),),
)


def drive(config: SensorSuite, rngs, pose0: np.ndarray, ticks: int, twist=(0.5, 0.1, 0.4)):
    """Read every tick of a constant-twist drive; returns the list of Readings."""
    s = Sensors(config, field=floor_field(), wheel_count=4, dt=DT)
    s.reset(rngs, pose0)
    n = pose0.shape[0]
    tw = np.tile(np.asarray(twist, float), (n, 1))
    out = []
    for k in range(ticks):
        t = k * DT
        pose = compose(pose0, exp(tw * t))
        wheel = np.outer(np.full(n, t), [10.0, -10.0, 9.0, -9.0])
        out.append(s.read(t, pose, wheel))
    return out


def starts(n: int) -> np.ndarray:
    return np.column_stack([np.linspace(1.0, 1.5, n), np.full(n, 2.0), np.zeros(n)])


@pytest.mark.parametrize("n", [0, 1, 5])
def test_shapes_for_batches(n):
    r = drive(NOISY, [np.random.default_rng(k) for k in range(n)], starts(n), 3)[-1]
    assert r.encoder_counts.shape == (n, 4)
    assert r.pod_counts.shape == (n, 2)
    assert r.gyro_rate.shape == r.imu_valid.shape == r.gyro_interval.shape == (n,)
    assert r.fix.shape == (n, 3) and r.fix_valid.shape == r.fix_time.shape == (n,)
    assert r.fix_sigma.shape == (3,)
    assert r.ranges.shape == r.range_valid.shape == (n, 1)
    assert r.range_mounts.shape == (1, 3) and r.range_max.shape == (1,)
    assert r.battery_voltage is None


def test_absent_sensors_are_none():
    r = drive(SensorSuite(imu=Imu()), [np.random.default_rng(0)], starts(1), 2)[-1]
    assert r.encoder_counts is None and r.pod_counts is None and r.fix is None and r.ranges is None
    assert r.gyro_rate.shape == (1,)


def _stack(readings, name):
    return np.array([getattr(r, name) for r in readings])


def test_robot_in_a_batch_reads_exactly_as_alone_and_repeats():
    seeds = np.random.SeedSequence(42).spawn(5)
    batch = drive(NOISY, [np.random.default_rng(s) for s in seeds], starts(5), 300)
    alone = drive(NOISY, [np.random.default_rng(seeds[3])], starts(5)[3:4], 300)
    again = drive(NOISY, [np.random.default_rng(s) for s in seeds], starts(5), 300)
    for name in ("encoder_counts", "pod_counts", "gyro_rate", "fix", "fix_time", "ranges"):
        a, b = _stack(batch, name), _stack(alone, name)
        np.testing.assert_array_equal(a[:, 3], b[:, 0], err_msg=name)
        np.testing.assert_array_equal(a, _stack(again, name), err_msg=name)
    assert np.isfinite(_stack(batch, "fix")).any()  # fixes did arrive


def test_encoders_floor_the_count_and_jitter_by_noise():
    cfg = SensorSuite(encoders=Encoders(counts_per_rev=100, noise=0.0))
    s = Sensors(cfg, field=floor_field(), wheel_count=2, dt=DT)
    s.reset([np.random.default_rng(0)], starts(1))
    r = s.read(0.0, starts(1), np.array([[2 * np.pi * 1.239, -2 * np.pi * 0.001]]))
    np.testing.assert_array_equal(r.encoder_counts, [[123.0, -1.0]])
    noisy = SensorSuite(encoders=Encoders(counts_per_rev=100, noise=2.0, quantise=False))
    s = Sensors(noisy, field=floor_field(), wheel_count=2, dt=DT)
    s.reset([np.random.default_rng(k) for k in range(400)], np.zeros((400, 3)))
    r = s.read(0.0, np.zeros((400, 3)), np.full((400, 2), 2 * np.pi))
    assert r.encoder_counts.mean() == pytest.approx(100.0, abs=0.3)
    assert r.encoder_counts.std() == pytest.approx(2.0, rel=0.08)


def test_pod_scale_error_and_skips():
    # straight drive of 1 m along the pod's direction: 2000 / (2 pi 0.024) counts per metre
    per_m = 2000 / (2 * np.pi * 0.024)
    pod = Pod(at=(0.0, 0.1), radius=0.024, counts_per_rev=2000, quantise=False)
    for p, expect in [(pod, 1.0), (dataclasses.replace(pod, scale_error=0.02), 1.02)]:
        r = drive(SensorSuite(pods=(p,)), [np.random.default_rng(0)], starts(1), 101, twist=(1.0, 0, 0))
        assert r[-1].pod_counts[0, 0] == pytest.approx(expect * per_m, rel=1e-12)
    skipping = dataclasses.replace(pod, skip=0.1)
    n = 200
    r = drive(SensorSuite(pods=(skipping,)), [np.random.default_rng(k) for k in range(n)],
              np.zeros((n, 3)), 101, twist=(1.0, 0, 0))
    # each tick lost with probability 0.1: about 90 % of the metre is counted
    assert r[-1].pod_counts[:, 0].mean() / per_m == pytest.approx(0.9, abs=0.01)


def test_pod_scale_error_per_robot():
    pod = Pod(at=(0.0, 0.1), radius=0.024, counts_per_rev=2000, quantise=False)
    s = Sensors(SensorSuite(pods=(pod,)), field=floor_field(), wheel_count=2, dt=DT)
    s.reset([np.random.default_rng(k) for k in range(2)], np.zeros((2, 3)),
            per_robot={"pods.scale_error": np.array([[0.0], [-0.05]])})
    s.read(0.0, np.zeros((2, 3)), np.zeros((2, 2)))
    r = s.read(DT, np.array([[0.01, 0, 0], [0.01, 0, 0]]), np.zeros((2, 2)))
    assert r.pod_counts[1, 0] / r.pod_counts[0, 0] == pytest.approx(0.95, rel=1e-12)


def test_gyro_scale_bias_and_sample_schedule():
    imu = Imu(rate=40.0, bias=0.02, scale_error=0.01)
    r = drive(SensorSuite(imu=imu), [np.random.default_rng(0)], starts(1), 21, twist=(0.3, 0, 0.8))
    valid = _stack(r, "imu_valid")[:, 0]
    # 40 Hz sampled by a 100 Hz loop: samples at 0.025, 0.05, ... arrive at ticks 3, 5, 8, 10, ...
    assert list(np.flatnonzero(valid)) == [3, 5, 8, 10, 13, 15, 18, 20]
    intervals = _stack(r, "gyro_interval")[valid, 0]
    np.testing.assert_allclose(intervals, [0.03, 0.02, 0.03, 0.02] * 2, atol=1e-12)
    np.testing.assert_allclose(_stack(r, "gyro_rate")[valid, 0], 1.01 * 0.8 + 0.02, atol=1e-12)
    assert np.isnan(_stack(r, "gyro_rate")[~valid, 0]).all()


def test_fix_noise_dropout_and_visibility():
    n = 400
    fixes = Fixes(rate=100.0, sigma_xy=0.03, sigma_heading=0.02, dropout=0.25, range=3.5)
    pose0 = np.tile([1.0, 2.0, 0.0], (n, 1))  # both landmarks within 3.5 m
    r = drive(SensorSuite(fixes=fixes), [np.random.default_rng(k) for k in range(n)], pose0, 1,
              twist=(0, 0, 0))[0]
    assert r.fix_valid.mean() == pytest.approx(0.75, abs=0.05)
    err = r.fix[r.fix_valid] - pose0[r.fix_valid]
    assert err.std(axis=0) == pytest.approx([0.03, 0.03, 0.02], rel=0.1)
    assert np.isnan(r.fix[~r.fix_valid]).all() and np.isnan(r.fix_time[~r.fix_valid]).all()


def test_fix_needs_a_landmark_in_view_in_range_and_unhidden():
    s = Sensors(SensorSuite(fixes=Fixes(fov=np.radians(90), range=2.0)), field=floor_field(),
                wheel_count=2, dt=DT)
    poses = np.array([
        [2.5, 2.0, 0.0],     # faces landmark 1 at 1.5 m, but the obstacle hides it
        [3.2, 2.0, 0.0],     # faces landmark 1 at 0.8 m: seen
        [3.2, 2.0, np.pi],   # faces away (landmark 2 is 3.2 m: out of range)
        [1.0, 2.0, np.pi],   # faces landmark 2 at 1.0 m: seen
        [1.0, 2.0, 1.0],     # landmark 2 is 123 deg off axis, outside the 90 deg view
    ])
    s.reset([np.random.default_rng(k) for k in range(5)], poses)
    visible = s.landmark_visible(poses)
    np.testing.assert_array_equal(visible, [[0, 0], [1, 0], [0, 0], [0, 1], [0, 0]])
    r = s.read(0.0, poses, np.zeros((5, 2)))
    np.testing.assert_array_equal(r.fix_valid, [False, True, False, True, False])


def test_no_fix_before_the_latency_has_passed():
    r = drive(SensorSuite(fixes=Fixes(rate=100.0, latency=0.05)), [np.random.default_rng(0)],
              starts(1), 10, twist=(0, 0, 0))
    assert list(np.flatnonzero(_stack(r, "fix_valid")[:, 0])) == [5, 6, 7, 8, 9]


def test_range_noise_and_rate():
    n = 300
    cfg = SensorSuite(range=(RangeSensor(at=(0.0, 0.0), max_range=3.0, sigma=0.02, rate=25.0),))
    pose0 = np.tile([1.0, 1.0, np.pi], (n, 1))  # wall 1.0 m behind
    r = drive(cfg, [np.random.default_rng(k) for k in range(n)], pose0, 9, twist=(0, 0, 0))
    valid = _stack(r, "range_valid")[:, 0, 0]
    assert list(np.flatnonzero(valid)) == [0, 4, 8]
    d = r[0].ranges[:, 0]
    assert d.mean() == pytest.approx(1.0, abs=0.005) and d.std() == pytest.approx(0.02, rel=0.1)
    assert np.isnan(r[1].ranges).all()


def test_read_rejects_wrong_time_and_shapes():
    s = Sensors(NOISY, field=floor_field(), wheel_count=4, dt=DT)
    s.reset([np.random.default_rng(0)], starts(1))
    with pytest.raises(ValueError, match="sensors: t must be the next control tick 0.0, got 0.01"):
        s.read(0.01, starts(1), np.zeros((1, 4)))
    with pytest.raises(ValueError, match=r"sensors: pose must have shape \(1, 3\)"):
        s.read(0.0, np.zeros((2, 3)), np.zeros((1, 4)))
    with pytest.raises(ValueError, match=r"sensors: wheel_angle must have shape \(1, 4\)"):
        s.read(0.0, starts(1), np.zeros((1, 2)))
    with pytest.raises(ValueError, match=r"sensors: pose0 must have shape \(2, 3\)"):
        s.reset([np.random.default_rng(0)] * 2, starts(1))
    with pytest.raises(ValueError, match="sensors: per_robot key must be one of"):
        s.reset([np.random.default_rng(0)], starts(1), per_robot={"imu.bais": np.zeros(1)})
    with pytest.raises(TypeError, match="sensors: rngs.0. must be a numpy.random.Generator"):
        s.reset([np.random.RandomState(0)], starts(1))
    with pytest.raises(ValueError, match="sensors: dt must be > 0"):
        Sensors(NOISY, field=floor_field(), wheel_count=4, dt=0.0)


def test_config_reads_units_and_rejects_bad_keys():
    table = {
        "encoders": {"counts_per_rev": 537.6},
        "pods": [{"at": ["0 in", "6 in"], "radius": "24 mm", "counts_per_rev": 2000,
                  "direction": "90 deg", "scale_error": "0.5 %"}],
        "imu": {"rate_noise": "0.1 deg/sqrt(h)", "bias_walk": "1 deg/h/sqrt(h)", "rate": "1000 Hz"},
        "fixes": {"latency": "80 ms", "fov": "70 deg"},
        "range": [{"at": [0.1, 0], "max_range": "2 m", "sigma": "5 mm"}],
    }
    cfg = read_table(SensorSuite, table, "s.toml", "sensors")
    assert cfg.pods[0].at == pytest.approx((0.0, 0.1524))
    assert cfg.pods[0].scale_error == pytest.approx(0.005)
    assert cfg.imu.rate_noise == pytest.approx(np.radians(0.1) / 60)
    assert cfg.imu.bias_walk == pytest.approx(np.radians(1) / 3600 / 60)
    assert cfg.fixes.latency == pytest.approx(0.08) and cfg.range[0].sigma == pytest.approx(0.005)
    with pytest.raises(ScenarioError, match="sensors.imu.rate_nosie: unknown key"):
        read_table(SensorSuite, {"imu": {"rate_nosie": 0.1}}, "s.toml", "sensors")
    with pytest.raises(ScenarioError, match="sensors.pods.0..skip must be >= 0 and < 1"):
        read_table(SensorSuite, {"pods": [{"at": [0, 0], "radius": 0.02, "counts_per_rev": 8,
                                           "skip": 1.5}]}, "s.toml", "sensors")


def test_every_config_field_declares_a_known_dimension():
    special = {"count", "dimensionless", "choice", "bool", "text", "table", "tables"}
    for cls in (SensorSuite, Encoders, Pod, Imu, Fixes, RangeSensor):
        for f in dataclasses.fields(cls):
            dim = f.metadata["param"].dimension
            assert dim in UNITS or dim in special, (cls.__name__, f.name, dim)
