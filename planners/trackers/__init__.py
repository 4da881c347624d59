"""Path trackers: one module per tracker, registered by name in :data:`TRACKERS`.

Built-in kinds: ``pure-pursuit``, ``stanley``, ``unicycle``, ``lqr``, ``holonomic`` and
``voltage-script``. Third-party trackers register through the entry-point group
``skidpad.trackers``. Build one with :func:`make_tracker` and check a new one with
:func:`planners.trackers.checker.check_tracker`.
"""

from __future__ import annotations

from typing import Any

from planners.trackers import holonomic, lqr, pure_pursuit, stanley, unicycle, voltage_script
from planners.trackers.base import TRACKERS, BodyCommand, Tracker, TrackerBase

__all__ = ["TRACKERS", "BodyCommand", "Tracker", "TrackerBase", "make_tracker"]
_BUILT_IN = (holonomic, lqr, pure_pursuit, stanley, unicycle, voltage_script)


def make_tracker(kind: str, *, chassis: str, **params: Any) -> Tracker:
    """Build the tracker registered as ``kind``.

    Parameters
    ----------
    kind : str — a name of :data:`TRACKERS`
    chassis : str — "mecanum", "skid" or "differential"
    **params — the ``[tracker]`` keys (without ``kind``), in SI

    Raises
    ------
    RegistryError
        For an unknown kind (with the closest name suggested).
    ScenarioError
        For a chassis the tracker cannot drive or a bad parameter.
    """
    return TRACKERS.get(kind)(chassis=chassis, **params)
