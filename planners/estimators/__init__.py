"""Pose estimators, one module each, registered by name in :data:`ESTIMATORS`."""

from __future__ import annotations

from planners.registry import Registry

ESTIMATORS: Registry = Registry("estimator", "skidpad.estimators")

from planners.estimators import truth  # noqa: E402,F401  (registers the built-ins)
from planners.estimators import odometry  # noqa: E402,F401
from planners.estimators import kalman  # noqa: E402,F401
from planners.estimators import ekf  # noqa: E402,F401
from planners.estimators import lowpass  # noqa: E402,F401
from planners.estimators import complementary  # noqa: E402,F401
from planners.estimators import luenberger  # noqa: E402,F401
from planners.estimators import particle  # noqa: E402,F401
