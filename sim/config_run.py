"""The ``[run]`` table and the plug-in tables (``[tracker]``, ``[estimator]``) of a scenario."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from planners.params import Param


def _p(dimension: str, default: object, doc: str, **kw) -> dict:
    return {"param": Param(dimension=dimension, default=default, doc=doc, **kw)}


@dataclass(frozen=True)
class Vary:
    """Per-run randomisation of one numeric robot key.

    ``relative`` (a fraction, from ``"5 %"``): uniform within nominal * (1 +- relative).
    ``low``/``high`` (from ``[lo, hi]``): uniform between the two, in the key's unit.
    """

    key: str
    relative: float | None = None
    low: float | None = None
    high: float | None = None

    def draw(self, nominal: float, u: float) -> float:
        """The value for a uniform draw ``u`` in [0, 1)."""
        if self.relative is not None:
            return nominal * (1.0 + self.relative * (2.0 * u - 1.0))
        return self.low + (self.high - self.low) * u  # type: ignore[operator]


@dataclass(frozen=True)
class Run:
    """How a scenario is run."""

    rate: float = field(default=200.0, metadata=_p("frequency", 200.0, "control rate", gt=0.0, le=10000.0))
    substep: float = field(
        default=0.001, metadata=_p("time", 0.001, "physics sub-step (raised when a robot needs it)", gt=0.0, le=0.1)
    )
    timeout: float | None = field(
        default=None, metadata=_p("time", None, "give up after (default: 2 x plan duration + 5 s)", gt=0.0)
    )
    seed: int = field(default=1, metadata=_p("count", 1, "base seed", ge=0))
    runs: int = field(default=1, metadata=_p("count", 1, "batch size", ge=1, le=10_000_000))
    collision: str = field(
        default="continue",
        metadata=_p("choice", "continue", "what a collision does", choices=("continue", "stop")),
    )
    goal_tolerance: float = field(
        default=0.03, metadata=_p("length", 0.03, "end position tolerance for completion", gt=0.0)
    )
    heading_tolerance: float = field(
        default=math.radians(3.0), metadata=_p("angle", math.radians(3.0), "end heading tolerance", gt=0.0)
    )
    settle_speed: float = field(
        default=0.02, metadata=_p("speed", 0.02, "speed below which the robot counts as stopped", gt=0.0)
    )
    vary: tuple[Vary, ...] = ()  # read by sim.scenario (free-form keys)

    def timeout_for(self, plan_duration: float) -> float:
        """Timeout [s] for a plan of the given duration."""
        return self.timeout if self.timeout is not None else 2.0 * plan_duration + 5.0


@dataclass(frozen=True)
class Plugin:
    """A ``[tracker]`` or ``[estimator]`` table: the registered ``kind`` and its parameters (SI)."""

    kind: str
    params: dict[str, Any]
