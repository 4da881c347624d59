"""Every registered estimator: shapes, finite output, seeded repeat, batch of N == N runs of 1."""

from __future__ import annotations

import numpy as np
import pytest

from planners.estimators import ESTIMATORS
from tests.planners.test_estimator_fixtures import context, drive, row

TICKS = 120
#: every registered estimator with its defaults, plus the variants that take other paths:
#: label -> (kind, parameters, with range sensors, ticks before the estimate must be close)
CONFIGS = {name: (name, {}, False, 0) for name in ESTIMATORS.names()} | {
    "ekf ranges": ("ekf", {"ranges": True}, True, 0),
    "ekf ranges, fixes as current": ("ekf", {"ranges": True, "latency": "ignore"}, True, 0),
    "particle ranges": ("particle", {"particles": 150}, True, 0),
    # a uniform start knows little until the first fix (tick 20)
    "particle uniform": ("particle", {"init": "uniform", "reset_gate": 11.34, "inject": 0.1}, True, 21),
    "kalman constant-velocity": ("kalman", {"model": "constant-velocity"}, False, 0),
    "kalman constant-velocity steady": ("kalman", {"model": "constant-velocity", "mode": "steady"}, False, 0),
    "kalman steady both": ("kalman", {"mode": "steady", "measure": "both"}, False, 0),
    "lowpass fixes": ("lowpass", {"smooth": "fixes", "a": 0.2}, False, 0),
}


def run(
    name: str, readings, pose0: np.ndarray, seed: int = 7, robots=None
) -> tuple[np.ndarray, object]:
    """Run an estimator; robot k draws from its own stream ``[seed, k]`` (as the runner does)."""
    kind, params, ranges, _ = CONFIGS[name]
    est = ESTIMATORS.get(kind)(**params, **context(ranges=ranges))
    n = pose0.shape[0]
    robots = range(n) if robots is None else robots
    est.reset(pose0, n, rngs=[np.random.default_rng([seed, k]) for k in robots])
    out = np.array([est.update(r.t, r) for r in readings])
    return out, est


@pytest.mark.parametrize("name", list(CONFIGS), ids=list(CONFIGS))
@pytest.mark.parametrize("n", [1, 5])
def test_shapes_and_finite(name: str, n: int) -> None:
    truth, readings = drive(n, TICKS, np.random.default_rng(1))
    out, est = run(name, readings, truth[0])
    assert out.shape == (TICKS, n, 3)
    assert np.all(np.isfinite(out))
    assert np.all(np.abs(out[:, :, 2]) <= np.pi)
    # every estimator stays within 0.2 m of the truth on this short, clean drive
    settle = CONFIGS[name][3]
    assert np.abs(out[settle:, :, :2] - truth[settle:, :, :2]).max() < 0.2
    cov = est.covariance
    assert cov is None or (cov.shape == (n, 3, 3) and np.all(np.isfinite(cov)))


@pytest.mark.parametrize("name", list(CONFIGS), ids=list(CONFIGS))
def test_seeded_repeat_and_batch_equals_singles(name: str) -> None:
    n = 5
    truth, readings = drive(n, TICKS, np.random.default_rng(2))
    a, _ = run(name, readings, truth[0])
    b, _ = run(name, readings, truth[0])
    np.testing.assert_array_equal(a, b)
    if getattr(ESTIMATORS.get(CONFIGS[name][0]), "PARAMS", {}).get("particles") is not None:
        c, _ = run(name, readings, truth[0], seed=8)
        assert np.abs(c - a).max() > 0.0  # another seed gives other draws
    for i in range(n):
        single, _ = run(name, [row(r, i) for r in readings], truth[0][i : i + 1], robots=[i])
        np.testing.assert_array_equal(single[:, 0], a[:, i])  # bit-identical


def test_empty_batch() -> None:
    for name in CONFIGS:
        _, readings = drive(0, 3, np.random.default_rng(3))
        out, _ = run(name, readings, np.zeros((0, 3)))
        assert out.shape == (3, 0, 3)
