"""Physics benchmark: robot-substeps per second by chassis and batch size."""

from __future__ import annotations

import time

import numpy as np

from sim.world import World


def bench_robot(chassis: str):
    """A bench robot of the bundled demo numbers (12 kg, 5 cm wheels, 13.7:1)."""
    import math

    from sim.config_robot import Battery, Motor, Robot

    return Robot(
        chassis=chassis, mass=12.0, footprint=(0.45, 0.45), wheel_radius=0.05, track=0.38,
        wheelbase=0.0 if chassis == "differential" else 0.34, gear_ratio=13.7,
        motor=Motor(free_speed=5800 * 2 * math.pi / 60, stall_torque=0.42, stall_current=22.0, free_current=1.4),
        battery=Battery(voltage=12.6, resistance=0.025),
    )


class PhysicsTicks:
    """Control ticks of ``World.advance`` (5 sub-steps of 1 ms) for N bench robots, warmed up.

    Parameters
    ----------
    chassis : str — of :func:`bench_robot`
    n : int — robots
    threads : bool — allow numba's threads (the World's adaptive choice); False: one thread
    """

    DT = 0.005

    def __init__(self, chassis: str, n: int, *, threads: bool = True) -> None:
        self.world = World(bench_robot(chassis), n, threads=threads)
        self.duty = np.tile(np.linspace(-0.8, 0.9, self.world.geom.wheels), (n, 1))
        self.world.advance(self.duty, self.DT)  # compile / warm

    def time(self, ticks: int) -> float:
        """Mean wall time of one tick over ``ticks`` ticks [s]."""
        start = time.perf_counter()
        for _ in range(ticks):
            self.world.advance(self.duty, self.DT)
        return (time.perf_counter() - start) / ticks


def bench_physics(*, quick: bool = False) -> dict:
    """Robot-substeps per second for N = 1, 100, 1000, 10000 for each chassis.

    Each call of ``advance`` runs 5 sub-steps (a 5 ms control tick at the 1 ms sub-step); the
    figure is the best of five timings, since other work on a shared machine only slows it.
    """
    sizes = (1, 100, 1000) if quick else (1, 100, 1000, 10000)
    out: dict = {}
    for chassis in ("mecanum", "skid", "differential"):
        for n in sizes:
            ticks = PhysicsTicks(chassis, n)
            count = max(3, int(20000 / n)) if not quick else max(2, int(4000 / n))
            # the best of five: other work on a shared machine only slows a run
            per_tick = min(ticks.time(count) for _ in range(1 if quick else 5))
            out[f"{chassis}_n{n}"] = 5 * n / per_tick
    return out
