"""Range sensors as the estimators see them: beam mounts, noise and the field's walls.

The runner's context carries ``sensors.range`` (each with ``at``, ``direction``,
``max_range``, ``sigma``) and ``field.segments`` (S, 4) [m]; nothing here imports
:mod:`sim`. The expected range of a beam is cast by :mod:`planners.raycast`, the same
compiled code the simulator uses for the true one.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from planners.errors import ScenarioError
from planners.params import Param
from planners.readings import Readings

#: smallest range noise the filters assume [m] (a noise-free simulated sensor still has
#: a model error: the wall as a line, the beam as a ray)
SIGMA_FLOOR = 0.005

RANGE_SIGMA_PARAM = Param(
    "length", None,
    f"range noise the filter assumes (default: each sensor's sigma, at least {SIGMA_FLOOR * 1e3:g} mm)",
    gt=0.0,
)


@dataclass(frozen=True)
class Beams:
    """The range sensors of one robot and the walls they see.

    Attributes
    ----------
    segments : ndarray, shape (S, 4) — walls x0, y0, x1, y1 [m], field frame
    mounts : ndarray, shape (R, 3) — beam start x, y [m] and direction [rad], body frame
    max_range : ndarray, shape (R,) — [m]; farther walls read ``inf``
    variance : ndarray, shape (R,) — range noise the filter assumes [m^2]
    """

    segments: np.ndarray
    mounts: np.ndarray
    max_range: np.ndarray
    variance: np.ndarray

    @property
    def count(self) -> int:
        """Number of beams R."""
        return int(self.mounts.shape[0])


def make_beams(context: dict[str, Any], sigma: float | None, *, where: str, required: bool) -> Beams | None:
    """The beams of ``context["sensors"].range`` against ``context["field"].segments``.

    Parameters
    ----------
    sigma : float or None — range noise to assume [m] (None: each sensor's, floored)
    required : bool — raise when the robot has no range sensors or the field no walls

    Returns
    -------
    Beams, or None when there are no range sensors and they are not required

    Raises
    ------
    ScenarioError
        When ``required`` and the robot has no range sensor or the field has no walls.
    """
    sensors = tuple(getattr(context.get("sensors"), "range", ()) or ())
    segments = getattr(context.get("field"), "segments", None)
    segments = np.zeros((0, 4)) if segments is None else np.ascontiguousarray(segments, dtype=np.float64)
    if not sensors:
        if required:
            raise ScenarioError(f"{where}: ranges needs [[sensors.range]] on the robot, got none")
        return None
    if segments.shape[0] < 3:
        raise ScenarioError(f"{where}: ranges needs a field with walls, got {segments.shape[0]} wall segments")
    mounts = np.array([[*s.at, getattr(s, "direction", 0.0)] for s in sensors], dtype=np.float64)
    own = np.array([getattr(s, "sigma", 0.0) for s in sensors], dtype=np.float64)
    sig = np.maximum(own, SIGMA_FLOOR) if sigma is None else np.full(len(sensors), float(sigma))
    return Beams(
        segments=segments, mounts=mounts,
        max_range=np.array([s.max_range for s in sensors], dtype=np.float64), variance=sig**2,
    )


def beam_readings(
    readings: Readings, beams: Beams | None, empty: tuple[np.ndarray, np.ndarray]
) -> tuple[np.ndarray, np.ndarray]:
    """This tick's ranges (N, R) [m] and flags (N, R), or ``empty`` ((N, 0) arrays) when no
    beams are used or none were read."""
    if beams is None or readings.ranges is None or readings.range_valid is None:
        return empty
    return (
        np.ascontiguousarray(readings.ranges, dtype=np.float64),
        np.ascontiguousarray(readings.range_valid, dtype=np.bool_),
    )
