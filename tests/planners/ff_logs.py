"""Synthetic robot logs of a wheel that obeys u = kS sign(v) + kV v + kA a exactly.

The wheel is integrated in closed form (exponential response of the first-order model) over
sub-steps of each sample interval, the voltage held over the interval (zero-order hold), and
the position is quantised like an encoder. Constants invented for tests.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from planners.log_writer import write_log

KS, KV, KA = 0.9, 0.28, 0.025  # [V], [V s/rad], [V s^2/rad]
DT = 0.005
CPR = 4096

#: a step test: (duration [s], voltage [V]); |u| > kS throughout, so the wheel never sticks
STEPS = [(0.6, 3.0), (0.6, 6.0), (0.6, 9.0), (0.6, 4.5), (0.6, -3.0), (0.6, -7.5), (0.6, -4.0), (0.6, 2.0)]


def simulate(levels, *, v0: float = 0.0, t=None, sub: int = 20):
    """Sample times [s], held voltage [V], shaft position [rad] and speed [rad/s], shape (T,).

    ``t`` (optional, increasing) gives uneven sample times; by default every ``DT``. The
    voltage of the level holding at ``t_k`` is applied from ``t_k`` to ``t_(k+1)``.
    """
    ends = np.cumsum([d for d, _ in levels])
    if t is None:
        t = DT * np.arange(round(ends[-1] / DT))
    segment = np.minimum(np.searchsorted(ends, t + 1e-12, side="right"), len(levels) - 1)
    u = np.array([volts for _, volts in levels])[segment]
    tau = KA / KV
    x = np.zeros(len(u))
    v = np.zeros(len(u))
    xk, vk = 0.0, v0
    steps = np.diff(t, append=t[-1] + DT)
    for k, uk in enumerate(u):
        x[k], v[k] = xk, vk
        h = steps[k] / sub
        decay = math.exp(-h / tau)
        for _ in range(sub):
            vss = (uk - KS * math.copysign(1.0, vk if vk != 0.0 else uk)) / KV
            xk += vss * h + (vk - vss) * tau * (1.0 - decay)
            vk = vss + (vk - vss) * decay
    return t, u, x, v


def write_ff_log(
    path: Path, levels, *, v0: float = 0.0, velocity: bool = False, t=None, noise: float = 0.0,
    volt_noise: float = 0.0, seed: int = 0,
) -> Path:
    """Write a two-side log of the same wheel on both sides.

    Positions in encoder counts with Gaussian read jitter of ``noise`` counts (seeded), or,
    with ``velocity``, the exact wheel speed in rad/s; the logged voltage carries Gaussian
    measurement noise of ``volt_noise`` [V] (the wheel was driven by the exact one).
    """
    tt, u, x, v = simulate(levels, v0=v0, t=t)
    rng = np.random.default_rng(seed)
    cols = {}
    for side in ("left", "right"):
        cols[f"voltage_{side}"] = ("V", u + rng.normal(0.0, 1.0, len(u)) * volt_noise)
        if velocity:
            cols[f"velocity_{side}"] = ("rad/s", v)
        else:
            counts = np.round(x * CPR / (2.0 * math.pi) + rng.normal(0.0, noise, len(x)) * (noise > 0))
            cols[f"position_{side}"] = ("counts", counts)
    return write_log(path, tt, cols, meta={"counts_per_rev": CPR})
