"""Estimators run alongside a bundled scenario driven on the truth, all on the same readings.

Comparing estimators that each drive their own robot compares different drives; here the
robots follow the route on the truth estimator and every estimator under test reads the
very same sensor readings, tick by tick (the runner's ``readings`` of the tick just taken).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from planners.estimators import ESTIMATORS
from planners.se2 import wrap
from sim.runner import Simulation
from sim.scenario import load_scenario


@dataclass
class Alongside:
    """Errors of each estimator, keyed by label.

    Attributes
    ----------
    position : dict of label -> ndarray (T, N) — position error at every tick [m]
    heading : dict of label -> ndarray (T, N) — |heading error| at every tick [rad]
    end : ndarray (N,) int — the tick each run ended at (completed, timeout, ...)
    status : list of str — each run's status
    spread : dict of label -> ndarray (N,) — sqrt of the trace of the position covariance
        right after reset [m] (estimators with a covariance)
    """

    position: dict[str, np.ndarray]
    heading: dict[str, np.ndarray]
    end: np.ndarray
    status: list[str]
    spread: dict[str, np.ndarray]

    def at_end(self, label: str) -> np.ndarray:
        """Position error (N,) [m] of ``label`` at each run's last tick."""
        return self.position[label][self.end, np.arange(self.end.size)]

    def rms(self, label: str, *, skip: int = 0) -> float:
        """RMS position error [m] over every run and tick up to each run's end (after ``skip``)."""
        err = self.position[label]
        live = np.arange(err.shape[0])[:, None] <= self.end[None, :]
        live[:skip] = False
        return float(np.sqrt(np.mean(err[live] ** 2)))


def run_alongside(
    scenario: str, estimators: dict[str, dict[str, Any]], *, runs: int, sets: list[str] | tuple = (),
    seconds: float | None = None, seed: int = 5,
) -> Alongside:
    """Drive ``runs`` runs of ``scenario`` on the truth and feed every estimator its readings.

    Parameters
    ----------
    estimators : dict of label -> ``[estimator]`` table (with ``kind``)
    sets : extra ``--set`` overrides of the scenario (besides the truth estimator)
    seconds : stop after this long (default: when every run has ended)
    seed : base seed of the estimators' own generators (particle filter)
    """
    sc = load_scenario(scenario, [*sets, 'estimator={kind="truth"}'])
    sim = Simulation(sc, runs=range(runs))
    built, spread = {}, {}
    for label, table in estimators.items():
        params = {k: v for k, v in table.items() if k != "kind"}
        est = ESTIMATORS.get(table["kind"])(geometry=sim.geom, sensors=sc.sensors, field=sc.field, dt=sim.dt, **params)
        rngs = [np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(k,))) for k in range(runs)]
        est.reset(sim.world.pose, runs, rngs=rngs)
        built[label] = est
        cov = est.covariance
        if cov is not None:
            spread[label] = np.sqrt(np.trace(cov[:, :2, :2], axis1=1, axis2=2))
    pos: dict[str, list] = {k: [] for k in built}
    head: dict[str, list] = {k: [] for k in built}
    while seconds is None or sim.t < seconds - 1e-9:
        truth = sim.world.pose.copy()
        going = sim.step()
        for label, est in built.items():
            out = est.update(sim.t - sim.dt, sim.readings)
            pos[label].append(np.hypot(*(out[:, :2] - truth[:, :2]).T))
            head[label].append(np.abs(wrap(out[:, 2] - truth[:, 2])))
        if not going:
            break
    ticks = len(next(iter(pos.values())))
    end = np.where(sim.active, ticks - 1, np.minimum(sim.end_tick, ticks - 1)).astype(np.int64)
    return Alongside(
        position={k: np.array(v) for k, v in pos.items()},
        heading={k: np.array(v) for k, v in head.items()},
        end=end, status=[str(s) for s in sim.status], spread=spread,
    )
