"""Batched chassis dynamics: the compiled sub-step kernel for N robots.

Per robot and sub-step ``h``:

1. battery: terminal voltage ``Vb = V0 - Rb * I_total`` (current of the previous sub-step);
2. normal loads: static, or shifted by the previous sub-step's acceleration (load transfer,
   Gillespie, *Fundamentals of Vehicle Dynamics*, 1992, ch. 2: ``dW = m a h / L`` per axle);
3. each wheel: motor, traction and implicit spin (:func:`sim.substep.wheel_step`), on the
   floor's friction under it (field friction scale and patches);
4. contact: penalty springs between footprint corners and walls (:mod:`sim.contact`);
5. rigid body and the exact arc (:func:`sim.substep.body_step`).

Two drivers walk a batch through those equations. A small batch goes robot by robot, every
sub-step of one robot before the next. A large batch goes in blocks of :data:`BLOCK` robots,
stage by stage within a block (structure of arrays in a scratch block), so that the
compiler turns the wheel and body stages into vector instructions over the robots; the stages
that branch per robot (floor patches, walls) run only for the robots that need them. Both
drivers call the same scalar functions in the same order, so a robot's numbers never depend
on the driver or on the batch around it.

A broad phase runs once per call rather than once per sub-step: a robot farther from every
wall than its footprint's reach plus twice its travel skips the contact test, and one whose
wheels cannot reach a friction patch's bounding box skips the patch test.

Array layout:

* ``body`` (2, N, 3): pose [x, y, heading] (field frame), velocity [vx, vy, omega] (body frame);
* ``wheel`` (7, N, W): rows :data:`WHEEL_ROWS`;
* ``robot`` (8, N): rows :data:`ROBOT_ROWS`;
* ``params`` (K + W, N): the rows of :data:`COLUMNS`, then each wheel's static load [N];
* ``layout`` (W, 5): wheel x, y (body frame), grip direction x, y and rim-speed factor;
* ``segs`` (S, 5): wall segments x0, y0, x1, y1, 1 where the floor lies left of the segment;
* ``patches`` (P, 6 + 2 V): vertex count, friction scale, bounding box (x0, y0, x1, y1),
  then the vertices x, y.

The block driver lives in :mod:`sim.physics_blocks`, the equations in :mod:`sim.substep`.
"""

from __future__ import annotations

import math

from numba import njit, prange

from sim.contact import contact_forces
from sim.physics_blocks import BLOCK, MAX_WHEELS, advance_block
from sim.substep import (
    AX, AY, COLUMNS, CURRENT, DIVERGED, ESLIP, FX, FY, HALFL, HALFW, INERTIA, LOAD, MASS, MODEL,
    MU, RB, ROBOT_ROWS, SLIP, SPEED, ANGLE, TRANSFER, V0, VB, WHEEL_ROWS,
    body_step, broad_phase, contact_count, floor_mu, heading_trig, keep_heading_trig, runaway,
    second_moments, shifted_load, wheel_step,
)

G0 = 9.80665
__all__ = [
    "BLOCK", "COLUMNS", "G0", "MAX_WHEELS", "ROBOT_ROWS", "WHEEL_ROWS", "step_kernel", "step_kernel_parallel",
]
#: batches this large take the block driver
BLOCK_MIN = 16


@njit(cache=True, error_model="numpy")
def _advance_robot(i, body, wheel, robot, duty, p, layout, segs, patches, floor_scale, h, steps):
    """Robot-by-robot driver: every sub-step of robot ``i``."""
    w = layout.shape[0]
    per_duty = w // duty.shape[1]  # 1, or wheels per side for a [left, right] duty
    kx, ky = second_moments(layout)
    x, y, th = body[0, i, 0], body[0, i, 1], body[0, i, 2]
    vx, vy, om = body[1, i, 0], body[1, i, 1], body[1, i, 2]
    c, s = heading_trig(robot, i, th)
    near_wall, near_patch = broad_phase(x, y, body[1, i], p, i, layout, segs, patches, h * steps)
    model = int(p[MODEL, i])
    heat = 0.0
    for _ in range(steps):
        itot = 0.0
        for j in range(w):
            itot += abs(wheel[CURRENT, i, j])
        vb = max(p[V0, i] - p[RB, i] * itot, 0.0)
        robot[VB, i] = vb
        if p[TRANSFER, i] > 0.5:
            total = 0.0
            for j in range(w):
                load = shifted_load(p, i, j, robot[AX, i], robot[AY, i], layout[j, 0] * kx, layout[j, 1] * ky)
                wheel[LOAD, i, j] = load
                total += load
            static = 0.0
            for j in range(w):
                static += p[len(COLUMNS) + j, i]
            scale = static / total if total > 0.0 else 1.0
            for j in range(w):
                wheel[LOAD, i, j] *= scale
        fx = 0.0
        fy = 0.0
        mz = 0.0
        for j in range(w):
            xj, yj = layout[j, 0], layout[j, 1]
            mu = p[MU, i] * floor_scale
            if near_patch:
                mu = floor_mu(mu, x + c * xj - s * yj, y + s * xj + c * yj, patches)
            u = min(max(duty[i, j // per_duty], -1.0), 1.0)
            wsp, amps, slip, f_x, f_y, dq = wheel_step(
                u, vb, wheel[SPEED, i, j], mu, wheel[LOAD, i, j], vx, vy, om, p, i,
                xj, yj, layout[j, 2], layout[j, 3], layout[j, 4], h, model,
            )
            wheel[SPEED, i, j] = wsp
            wheel[ANGLE, i, j] += h * wsp
            wheel[CURRENT, i, j] = amps
            wheel[SLIP, i, j] = slip
            wheel[FX, i, j] = f_x
            wheel[FY, i, j] = f_y
            heat += dq
            fx += f_x
            fy += f_y
            mz += xj * f_y - yj * f_x
        depth = 0.0
        if near_wall:
            cfx, cfy, cmz, depth = contact_forces(x, y, c, s, vx, vy, om, p[HALFL, i], p[HALFW, i], p[MASS, i], segs)
            fx += cfx
            fy += cfy
            mz += cmz
        contact_count(robot, i, depth, h)
        inv_m = 1.0 / p[MASS, i]
        ax = fx * inv_m
        ay = fy * inv_m
        robot[AX, i] = ax
        robot[AY, i] = ay
        x, y, th, c, s, vx, vy, om = body_step(x, y, th, c, s, vx, vy, om, ax, ay, mz / p[INERTIA, i], h)
        bad = runaway(x, y, vx, om, h)
        for j in range(w):
            bad = bad or not math.isfinite(wheel[SPEED, i, j])
        if bad:
            robot[DIVERGED, i] = 1.0
    robot[ESLIP, i] += heat
    body[0, i, 0], body[0, i, 1], body[0, i, 2] = x, y, th
    keep_heading_trig(robot, i, th, c, s)
    body[1, i, 0], body[1, i, 1], body[1, i, 2] = vx, vy, om


@njit(cache=True, error_model="numpy")
def step_kernel(body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps):
    """Advance every robot ``steps`` sub-steps of ``h`` seconds (arrays updated in place)."""
    n = body.shape[1]
    if n < BLOCK_MIN:
        for i in range(n):
            _advance_robot(i, body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps)
        return
    for a in range(0, n, BLOCK):
        advance_block(a, min(a + BLOCK, n), body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps)


@njit(cache=True, parallel=True, error_model="numpy")
def step_kernel_parallel(body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps):
    """:func:`step_kernel` with the blocks spread over threads (each block writes only its own
    robots, so the result is the same bit for bit)."""
    n = body.shape[1]
    for k in prange((n + BLOCK - 1) // BLOCK):
        a = k * BLOCK
        advance_block(a, min(a + BLOCK, n), body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps)
