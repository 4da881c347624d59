"""Conformance checker for trackers: the contract every registered tracker must keep.

:func:`check_tracker` builds a tracker for each chassis it declares, feeds it a seeded
sequence of states near a plan and checks output shapes for N in {0, 1, 5}, finite values,
``vy = 0`` on chassis that cannot strafe, exact repetition (same seed, fresh instance, and
after ``reset``) and that one batch of N gives the same rows as N runs of one.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from planners.errors import SkidpadError
from planners.plan import Plan
from planners.trackers.base import BodyCommand


class ConformanceError(SkidpadError, AssertionError):
    """A tracker breaks the tracker contract."""


def _inputs(plan: Plan, n: int, ticks: int, rng: np.random.Generator) -> tuple[np.ndarray, ...]:
    k = np.arange(ticks)
    t = k * plan.dt
    pose, vel, _ = plan.sample(t)
    poses = pose[:, None, :] + rng.normal(0.0, [0.05, 0.05, 0.05], size=(ticks, n, 3))
    vels = vel[:, None, :] + rng.normal(0.0, [0.05, 0.02, 0.1], size=(ticks, n, 3))
    return t, poses, vels


def _run(cls: type, chassis: str, params: dict, plan: Plan, t, poses, vels) -> list[BodyCommand]:
    tracker = cls(chassis=chassis, **params)
    tracker.reset(plan, poses.shape[1])
    return [tracker.command(float(tk), poses[k], vels[k]) for k, tk in enumerate(t)]


def _fields(cmd: BodyCommand) -> dict[str, np.ndarray]:
    return {
        k: getattr(cmd, k)
        for k in ("velocity", "accel", "duty", "target")
        if getattr(cmd, k) is not None
    }


def _same(a: list[BodyCommand], b: list[BodyCommand], what: str, name: str) -> None:
    for k, (ca, cb) in enumerate(zip(a, b, strict=True)):
        fa, fb = _fields(ca), _fields(cb)
        if fa.keys() != fb.keys():
            raise ConformanceError(f"tracker {name}: {what}: fields differ at tick {k}")
        for key in fa:
            if not np.array_equal(fa[key], fb[key]):
                raise ConformanceError(
                    f"tracker {name}: {what}: {key} differs at tick {k}: "
                    f"{fa[key].tolist()} vs {fb[key].tolist()}"
                )


def check_tracker(
    cls: type,
    plan: Plan,
    *,
    params: dict[str, Any] | None = None,
    chassis: tuple[str, ...] | None = None,
    ticks: int = 40,
    seed: int = 0,
) -> None:
    """Check one tracker class against the tracker contract.

    Parameters
    ----------
    cls : type — a tracker class (``PARAMS``, ``CHASSIS``, ``reset``, ``command``)
    plan : Plan — a plan at least ``ticks`` long
    params : dict, optional — tracker keys in SI (default: ``cls.EXAMPLE_PARAMS``)
    chassis : tuple of str, optional — chassis to check (default: ``cls.CHASSIS``)
    ticks : int — consecutive control ticks fed from the plan's start
    seed : int — seed of the state perturbations

    Raises
    ------
    ConformanceError
        On the first broken rule, naming it.
    """
    name = getattr(cls, "name", cls.__name__)
    for attr in ("PARAMS", "CHASSIS"):
        if not hasattr(cls, attr):
            raise ConformanceError(f"tracker {name}: class attribute {attr} is missing")
    params = dict(getattr(cls, "EXAMPLE_PARAMS", {}) if params is None else params)
    n_big = 5
    for ch in chassis or cls.CHASSIS:
        t, poses, vels = _inputs(plan, n_big, ticks, np.random.default_rng(seed))
        for n in (0, 1, n_big):
            cmds = _run(cls, ch, params, plan, t, poses[:, :n], vels[:, :n])
            for k, cmd in enumerate(cmds):
                _check_command(name, ch, n, k, cmd)
        batch = _run(cls, ch, params, plan, t, poses, vels)
        again = _run(cls, ch, params, plan, t, poses, vels)
        _same(batch, again, f"{ch}: a second run with the same seed", name)
        tracker = cls(chassis=ch, **params)
        for _ in range(2):  # reset must clear every memory
            tracker.reset(plan, n_big)
            rerun = [tracker.command(float(tk), poses[k], vels[k]) for k, tk in enumerate(t)]
        _same(batch, rerun, f"{ch}: a run after reset", name)
        for i in range(n_big):
            single = _run(cls, ch, params, plan, t, poses[:, i : i + 1], vels[:, i : i + 1])
            rows = [BodyCommand(**{k: v[i : i + 1] for k, v in _fields(c).items()}) for c in batch]
            _same(rows, single, f"{ch}: row {i} of a batch vs a run of one", name)


def _check_command(name: str, chassis: str, n: int, k: int, cmd: object) -> None:
    where = f"tracker {name} ({chassis}, N={n}, tick {k})"
    if not isinstance(cmd, BodyCommand):
        raise ConformanceError(f"{where}: command must return a BodyCommand, got {type(cmd)}")
    for key in ("velocity", "accel"):
        arr = getattr(cmd, key)
        if not isinstance(arr, np.ndarray) or arr.shape != (n, 3):
            raise ConformanceError(f"{where}: {key} must have shape ({n}, 3), got {np.shape(arr)}")
    if cmd.target is not None and np.shape(cmd.target) != (n, 2):
        raise ConformanceError(
            f"{where}: target must have shape ({n}, 2), got {np.shape(cmd.target)}"
        )
    if cmd.duty is not None:
        duty = np.asarray(cmd.duty)
        if duty.ndim != 2 or duty.shape[0] != n or duty.shape[1] < 1:
            raise ConformanceError(f"{where}: duty must have shape ({n}, W), got {duty.shape}")
        if np.any(np.abs(duty) > 1.0):
            raise ConformanceError(f"{where}: duty must be in [-1, 1], got {duty.tolist()}")
    for key, arr in _fields(cmd).items():
        if not np.all(np.isfinite(arr)):
            raise ConformanceError(f"{where}: {key} must be finite, got {arr.tolist()}")
    if chassis != "mecanum" and np.any(cmd.velocity[:, 1] != 0.0):
        raise ConformanceError(f"{where}: velocity vy must be 0 on a {chassis} chassis")
