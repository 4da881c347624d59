"""Everything that exists only in simulation: world, physics, sensors, runner, CLI.

May import :mod:`planners`; the reverse never happens.
"""
