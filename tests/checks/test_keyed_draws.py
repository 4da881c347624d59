"""Checks of the keyed sensor draws (sim.keyed_draws) against their published definitions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numba import njit
from scipy import stats

from sim import keyed_draws as kd


@njit(cache=True)
def _words(key, count):
    out = np.empty(count, dtype=np.uint64)
    for c in range(count):
        out[c] = kd.word(key, c)
    return out


def test_splitmix64_matches_the_reference_outputs():
    # The reference splitmix64.c (Vigna, public domain; Steele, Lea & Flood 2014) seeded
    # with 1234567 prints these first five outputs (value from memory)...
    got = _words(np.uint64(1234567), 5)
    assert got.tolist() == [6457827717110365317, 3203168211198807973, 9817491932198370423,
                            4593380528125082431, 16408922859458223821]

    # ...and a plain-integer transcription of the published algorithm agrees further out.
    def reference(seed: int, count: int) -> list[int]:
        mask, x, out = (1 << 64) - 1, seed, []
        for _ in range(count):
            x = (x + 0x9E3779B97F4A7C15) & mask
            z = x
            z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & mask
            z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & mask
            out.append(z ^ (z >> 31))
        return out

    for seed in (0, 1, 2**64 - 1, 0xDEADBEEF):
        assert _words(np.uint64(seed), 200).tolist() == reference(seed, 200)


def test_ziggurat_layers_have_equal_area_and_close_at_the_top():
    # Marsaglia & Tsang 2000, section 2: layer i (from x[i+1] to x[i]) has area
    # x[i] (f(x[i+1]) - f(x[i])) = v, the base (rectangle of width x[0] plus the tail) too,
    # and with r = 3.6541528853610088 the top layer ends at the peak: x[255] (1 - f(x[255])) = v.
    x, f, v = kd.EDGES, kd.DENSITY, kd.ZIGGURAT_V
    areas = x[1:255] * (f[2:256] - f[1:255])
    np.testing.assert_allclose(areas, v, rtol=1e-8)
    tail = math.sqrt(math.pi / 2) * math.erfc(kd.ZIGGURAT_R / math.sqrt(2))
    assert x[0] * f[1] == pytest.approx(v, rel=1e-12)
    assert kd.ZIGGURAT_R * f[1] + tail == pytest.approx(v, rel=1e-8)
    assert x[255] * (1.0 - f[255]) == pytest.approx(v, rel=1e-6)
    assert x[255] == pytest.approx(0.2152418959, abs=1e-9)  # their table, value from memory


def test_normals_follow_the_standard_normal_law():
    # 400 000 draws from 1000 robots: Kolmogorov-Smirnov against scipy's normal, the mass of
    # the tail beyond r (drawn by the slow path) and of each wedge-heavy band within four
    # binomial standard deviations, and the first four moments.
    keys = kd.robot_keys([np.random.default_rng(s) for s in np.random.SeedSequence(11).spawn(1000)])
    z = kd.normals(keys, 0, 400).ravel()
    assert stats.kstest(z, "norm").pvalue > 1e-3
    for lo, hi in ((kd.ZIGGURAT_R, np.inf), (2.0, 3.0), (0.0, 0.2152), (1.0, 1.2)):
        p = stats.norm.cdf(hi) - stats.norm.cdf(lo)
        got = np.mean((np.abs(z) >= lo) & (np.abs(z) < hi))
        assert abs(got - 2 * p) < 4 * math.sqrt(2 * p / z.size), (lo, hi, got, 2 * p)
    assert abs(z.mean()) < 4 / math.sqrt(z.size)
    assert z.var() == pytest.approx(1.0, abs=4 * math.sqrt(2 / z.size))
    assert stats.skew(z) == pytest.approx(0.0, abs=0.02)
    assert stats.kurtosis(z) == pytest.approx(0.0, abs=0.04)


def test_uniforms_are_uniform_and_draws_are_independent_across_robots_and_counters():
    keys = kd.robot_keys([np.random.default_rng(s) for s in np.random.SeedSequence(12).spawn(500)])
    u = kd.uniforms(keys, 1000, 200)
    assert stats.kstest(u.ravel(), "uniform").pvalue > 1e-3
    z = kd.normals(keys, 0, 200)  # (counters, robots)
    # neighbouring counters of one robot, and neighbouring robots at one counter
    lag = np.corrcoef(z[:-1].ravel(), z[1:].ravel())[0, 1]
    side = np.corrcoef(z[:, :-1].ravel(), z[:, 1:].ravel())[0, 1]
    assert abs(lag) < 4 / math.sqrt(z.size) and abs(side) < 4 / math.sqrt(z.size)


def test_a_robots_draws_do_not_depend_on_its_batch():
    keys = kd.robot_keys([np.random.default_rng(s) for s in np.random.SeedSequence(13).spawn(50)])
    batch = kd.normals(keys, 77, 30)
    for i in (0, 17, 49):
        np.testing.assert_array_equal(kd.normals(keys[i : i + 1], 77, 30)[:, 0], batch[:, i])
    # a later start counter continues the same stream
    np.testing.assert_array_equal(kd.normals(keys, 87, 20), batch[10:])
