"""Robot-side software of skidpad: what would run on the robot.

Pure numpy/scipy (numba for hot kernels). Never imports :mod:`sim`.
"""
