"""Open-loop duty script: a list of timed steps, for characterisation runs and physics checks."""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from planners.errors import ScenarioError, format_value
from planners.params import Param
from planners.plan import Plan
from planners.trackers.base import TRACKERS, BodyCommand, TrackerBase, resolve_params

_STEP = {
    "until": Param("time", doc="the step holds while t < until", gt=0.0),
    "duty": Param("dimensionless", doc="duty per wheel in [-1, 1]", shape=-1, ge=-1.0, le=1.0),
}


@TRACKERS.register("voltage-script")
class VoltageScript(TrackerBase):
    """Open loop: drive fixed duties per wheel for scripted lengths of time.

    Source: common practice for motor characterisation (quasi-static ramps and steps of
    applied voltage), no source.

    ``[[tracker.step]]`` tables ``{until = time, duty = [per wheel]}``, ``until`` strictly
    increasing; step ``j`` is applied while ``until[j-1] <= t < until[j]`` and the duty is
    zero after the last step. The command carries ``duty`` (N, W), so the runner bypasses the
    wheel control; ``velocity`` and ``accel`` are zero. The plan is ignored (``target`` is
    None). The runner must check that ``wheels`` equals the robot's wheel count.

    Parameters
    ----------
    chassis : str
    step : list of dict — ``{"until": float [s], "duty": sequence of float}``

    Raises
    ------
    ScenarioError
        For no steps, an unknown or missing step key, a ``until`` that does not increase,
        duties of different lengths or outside [-1, 1].
    """

    PARAMS: ClassVar[dict[str, Param]] = {
        "step": Param("tables", doc="timed duty steps", item=_STEP),
    }
    EXAMPLE_PARAMS: ClassVar[dict[str, Any]] = {
        "step": [{"until": 0.5, "duty": [0.3, 0.3]}, {"until": 1.0, "duty": [-0.2, 0.4]}]
    }

    def __init__(self, *, chassis: str, **params: Any) -> None:
        super().__init__(chassis=chassis, **params)
        steps = self.params["step"]
        if not steps:
            raise ScenarioError("tracker: step must be one or more tables, got none")
        until, duty = [], []
        for j, table in enumerate(steps):
            item = resolve_params(f"tracker.step[{j}]", _STEP, dict(table))
            d = np.atleast_1d(np.asarray(item["duty"], dtype=np.float64))
            if d.ndim != 1 or (duty and d.shape != duty[0].shape):
                raise ScenarioError(
                    f"tracker.step[{j}]: duty must have one value per wheel like step[0] "
                    f"({duty[0].size if duty else '>= 1'}), got {format_value(item['duty'])}"
                )
            if until and item["until"] <= until[-1]:
                raise ScenarioError(
                    f"tracker.step[{j}]: until must be > {until[-1]:g} (the step before), "
                    f"got {item['until']!r}"
                )
            until.append(float(item["until"]))
            duty.append(d)
        self.until = np.array(until)
        self.duties = np.vstack(duty + [np.zeros_like(duty[0])])

    @property
    def wheels(self) -> int:
        """W, the number of duties in each step."""
        return int(self.duties.shape[1])

    def reset(self, plan: Plan, n: int) -> None:
        """Start the script for ``n`` robots (the plan is not used)."""
        self.plan = plan
        self.n = int(n)

    def command(self, t: float, pose: np.ndarray, velocity: np.ndarray) -> BodyCommand:
        """Return the duties of the step holding at ``t``, shape (N, W)."""
        self._check_batch(pose, velocity)
        j = int(np.searchsorted(self.until, float(t), side="right"))
        zeros = np.zeros((self.n, 3))
        return BodyCommand(
            velocity=zeros, accel=zeros.copy(), duty=np.tile(self.duties[j], (self.n, 1))
        )
