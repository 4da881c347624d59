"""Every closed-loop tracker converges on an ideal kinematic plant, as its docstring says.

The plant integrates the commanded body twist exactly over each tick (planners.se2.exp):
no slip, perfect sensing. Started 0.1 m and 10 deg off the plan, the error halves within the
time each tracker states in its docstring (its ``halving_time``) and stays below half from
then on. The stated times come from the sources named in each tracker's docstring:

- pure-pursuit: Coulter, CMU-RI-TR-92-01 (1992); the linearised lateral dynamics
  e'' + (2v/L) e' + (2v^2/L^2) e = 0 follow from his curvature 2y/L^2 (derived, no source);
- stanley: Hoffmann, Tomlin, Montemerlo, Thrun, ACC 2007: front cross-track error decays
  as exp(-k t) for small errors;
- unicycle: De Luca, Oriolo, Vendittelli (2001): linearised error with natural frequency
  a = sqrt(w_d^2 + b v_d^2) and damping zeta;
- lqr: discrete LQR (Franklin, Powell, Workman, Digital Control of Dynamic Systems, 1998):
  the closed-loop poles of the design set the decay rate;
- holonomic: each field axis is e' = -k e on this plant (common practice, no source).

Error measured: cross-track distance for path trackers (pure-pursuit, stanley, which do not
track time along the path), distance to the timed reference for the others. The last second
of each constant-speed test plan is left out: there the plan stops abruptly, which a timed
plan never does.
"""

from __future__ import annotations

import numpy as np
import pytest

from planners import se2
from planners.plan import project
from planners.trackers import make_tracker
from tests.planners.plan_fixtures import (
    circle_plan,
    drive_kinematic,
    figure_eight_plan,
    line_plan,
)

CLOSED_LOOP = {
    "pure-pursuit": "differential",
    "stanley": "skid",
    "unicycle": "differential",
    "lqr": "skid",
    "holonomic": "mecanum",
}
GEOMETRIC = {"pure-pursuit", "stanley"}
PLANS = {
    "line": lambda: line_plan(speed=0.5, length=3.5),
    "fast-line": lambda: line_plan(speed=1.5, length=8.0),
    "reverse-line": lambda: line_plan(speed=0.5, length=3.5, reverse=True),
    "circle": lambda: circle_plan(radius=1.0, speed=0.5, turns=0.6),
}
# 0.1 m off sideways, 10 deg off in heading, in every sign combination
OFFSETS = np.array(
    [[0.0, 0.1, 0.1745], [0.0, -0.1, 0.1745], [0.0, 0.1, -0.1745], [0.0, -0.1, -0.1745]]
)


def _errors(plan, poses, geometric):
    if geometric:
        s = np.zeros(poses.shape[1])
        out = np.empty(poses.shape[:2])
        for k in range(poses.shape[0]):
            s, d = project(plan, poses[k, :, :2], s)
            out[k] = np.abs(d)
        return out
    ref = plan.pose[: poses.shape[0], None, :2]
    return np.hypot(*(poses[:, :, :2] - ref).transpose(2, 0, 1))


@pytest.mark.parametrize("plan_name", list(PLANS))
@pytest.mark.parametrize("name", list(CLOSED_LOOP))
def test_error_halves_within_stated_time(name, plan_name):
    plan = PLANS[plan_name]()
    tracker = make_tracker(name, chassis=CLOSED_LOOP[name])
    start = se2.compose(np.repeat(plan.pose[:1], len(OFFSETS), axis=0), OFFSETS)
    ticks = len(plan.t) - int(round(1.0 / plan.dt))
    poses = drive_kinematic(tracker, plan, start, ticks)
    err = _errors(plan, poses, name in GEOMETRIC)
    np.testing.assert_allclose(err[0], 0.1, atol=1e-6)  # the path is a polyline
    t_half = tracker.halving_time(float(plan.velocity[0, 0]))
    k_half = int(np.ceil(t_half / plan.dt))
    assert k_half < ticks - 100, "the plan must outlast the stated time"
    assert np.max(err[k_half:]) <= 0.05, (
        f"{name} on {plan_name}: error {np.max(err[k_half:]):.4f} m after {t_half:.3f} s"
    )


@pytest.mark.parametrize(
    ("name", "heading"),
    [("unicycle", "tangent"), ("lqr", "tangent"), ("holonomic", "tangent"), ("holonomic", "hold")],
)
def test_figure_eight_started_on_plan(name, heading):
    # started on the plan, the cross-track RMS over one figure-eight stays under 1 cm
    plan = figure_eight_plan(size=1.2, period=12.0, heading=heading, hold=0.4)
    tracker = make_tracker(name, chassis=CLOSED_LOOP[name])
    poses = drive_kinematic(tracker, plan, plan.pose[:1].copy())
    cross = _errors(plan, poses, geometric=True)[:, 0]
    assert np.sqrt(np.mean(cross**2)) < 0.01
    if heading == "hold":
        np.testing.assert_allclose(poses[:, 0, 2], 0.4, atol=1e-6)
