"""Pose estimators, one module each, registered by name in :data:`ESTIMATORS`."""

from __future__ import annotations

from planners.registry import Registry

ESTIMATORS: Registry = Registry("estimator", "skidpad.estimators")

from planners.estimators import truth  # noqa: E402,F401  (registers the built-ins)
