"""World bookkeeping: poses set from outside, duty shapes, the carried heading trigonometry."""

from __future__ import annotations

import numpy as np
import pytest

from sim.world import World
from tests.sim.robots import robot


@pytest.mark.parametrize("n", [1, 100])  # robot by robot, and the block driver
def test_a_heading_set_between_steps_is_honoured(n):
    # the kernel carries cos/sin of the heading from one call to the next; a pose written by
    # the caller in between must win
    world = World(robot("skid"), n)
    for _ in range(20):
        world.advance(np.full((n, 2), 0.5), 0.005)
    world.pose[:, :2] = 0.0
    world.pose[:, 2] = np.pi / 2
    world.velocity[:] = 0.0
    for _ in range(200):
        world.advance(np.full((n, 2), 0.5), 0.005)
    # driving straight ahead now means along +y
    assert np.all(world.pose[:, 1] > 0.3)
    assert np.all(np.abs(world.pose[:, 0]) < 0.01 * world.pose[:, 1])


def test_wrong_duty_shape_is_one_clear_error():
    world = World(robot("mecanum"), 3)
    with pytest.raises(Exception, match="duty must have 4 values per robot"):
        world.advance(np.zeros((3, 2)), 0.005)
    with pytest.raises(ValueError, match=r"duty must have shape \(3, 4\)"):
        world.advance(np.zeros((2, 4)), 0.005)
