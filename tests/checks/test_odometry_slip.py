"""Wheel slip fools drive-encoder odometry but not unpowered pods (tracking wheels).

Common practice, no source: a driven wheel that spins on a slippery floor turns further than
the robot travels, so encoder odometry over-estimates the distance, while an unpowered
tracking wheel pressed to the floor rolls with the floor; it is why tracking wheels are
fitted. The check drives the bundled long straight with a hard launch on a floor of mu 0.25.
"""

from __future__ import annotations

from sim.drift import odometry_sources
from sim.runner import Simulation
from sim.scenario import load_scenario

PODS = (
    "sensors.pods=[{at=[0.0, 0.15], radius=0.024, counts_per_rev=8192},"
    " {at=[0.0, -0.15], radius=0.024, counts_per_rev=8192},"
    " {at=[-0.15, 0.0], direction=1.5707963267948966, radius=0.024, counts_per_rev=8192}]"
)


def test_hard_launch_on_ice_fools_encoders_not_pods():
    # A wheel spinning on a slippery floor turns more than the robot travels: encoder odometry
    # over-estimates the distance; unpowered pods roll with the floor and do not.
    sc = load_scenario(
        "scenarios/long-straight-skid.toml",
        [PODS, 'robot.traction.mu=0.25', 'route.max_accel="6 m/s^2"', 'run.timeout="20 s"'],
    )
    sim = Simulation(sc, runs=[0])
    sources = odometry_sources(sim)
    for odo in sources.values():
        odo.reset(sim.world.pose.copy())
    x0 = sim.world.pose[0, 0]
    while sim.step():
        for odo in sources.values():
            odo.update(sim.readings)
        if sim.world.pose[0, 0] - x0 > 3.0:
            break
    truth = sim.world.pose[0, 0] - x0
    enc = sources["encoders"].pose[0, 0] - x0
    pods = sources["pods"].pose[0, 0] - x0
    assert enc > truth * 1.02
    assert abs(pods - truth) < 0.005 * truth
