"""The block driver of :mod:`sim.physics`: blocks of robots, stage by stage.

Each call copies a block of up to :data:`BLOCK` robots into a scratch block with one row per
quantity (structure of arrays), runs every sub-step over it stage by stage, and copies the
results back. The scratch's shape is a compile-time constant, so every row sits at a fixed
distance from every other and the compiler vectorises the stage loops over the robots without
run-time overlap checks; the wheel stage works on fixed rows (the slot), so each wheel's rows
are copied into the slot and back. A partial block fills its spare lanes with a copy of its
first robot, so the stage loops always run the full block; those lanes are never written back.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from sim.contact import contact_forces
from sim.substep import (
    ANGLE, AX, AY, COLUMNS, CURRENT, DIVERGED, ESLIP, FX, FY, HALFL, HALFW, INCONTACT, INERTIA,
    LOAD, MASS, MODEL, MU, RB, SLIP, SPEED, TRANSFER, V0, VB, WHEEL_ROWS,
    body_step, broad_phase, contact_count, floor_mu, heading_trig, keep_heading_trig, runaway,
    second_moments, shifted_load, wheel_step,
)

#: robots per block of the block driver (their work rows stay in cache through a call)
BLOCK = 64
#: most wheels of any chassis (the block scratch has rows for this many)
MAX_WHEELS = 6
# Block scratch, allocated per block and call: ``wk`` (ROWS, BLOCK) holds the parameter rows
# (the same row numbers as in the parameter block) and the robot rows; ``ws`` (MAX_WHEELS,
# _WWHEEL, BLOCK) holds each wheel's rows (the 7 wheel rows, the floor's mu under it and its
# duty). The shapes are compile-time constants, so every row sits at a fixed distance from
# every other, and ``ws[j]`` (one wheel) keeps a constant shape: the compiler vectorises the
# stage loops over the robots with at most one run-time overlap check.
_P = len(COLUMNS) + MAX_WHEELS
(
    _WX, _WY, _WTH, _WC, _WS, _WVX, _WVY, _WOM, _WFX, _WFY, _WMZ, _WVB, _WWALL, _WPATCH, _WHEAT,
    _WAX, _WAY, _WBAD,
) = range(_P, _P + 18)
_WMU, _WDUTY = len(WHEEL_ROWS), len(WHEEL_ROWS) + 1
_WWHEEL = len(WHEEL_ROWS) + 2
ROWS = _P + 18



_INLINE = dict(cache=True, error_model="numpy", forceinline=True)


@njit(**_INLINE)
def _wheel_stage(wk, wv, xj, yj, gdx, gdy, gsc, h, magic):
    """The wheel in the slot, every lane of the block, one sub-step (``magic``: some robot
    uses the magic formula, else the model is coulomb for all)."""
    for k in range(BLOCK):
        model = int(wk[MODEL, k]) if magic else 0
        u = min(max(wv[_WDUTY, k], -1.0), 1.0)
        wsp, amps, slip, f_x, f_y, dq = wheel_step(
            u, wk[_WVB, k], wv[SPEED, k], wv[_WMU, k], wv[LOAD, k],
            wk[_WVX, k], wk[_WVY, k], wk[_WOM, k], wk, k, xj, yj, gdx, gdy, gsc, h, model,
        )
        wv[SPEED, k] = wsp
        wv[ANGLE, k] += h * wsp
        wv[CURRENT, k] = amps
        wv[SLIP, k] = slip
        wv[FX, k] = f_x
        wv[FY, k] = f_y
        wk[_WHEAT, k] += dq
        wk[_WFX, k] += f_x
        wk[_WFY, k] += f_y
        wk[_WMZ, k] += xj * f_y - yj * f_x


@njit(**_INLINE)
def _body_stage(wk, h):
    """Rigid body, every lane of the block, one sub-step."""
    for k in range(BLOCK):
        inv_m = 1.0 / wk[MASS, k]
        ax = wk[_WFX, k] * inv_m
        ay = wk[_WFY, k] * inv_m
        wk[_WAX, k] = ax
        wk[_WAY, k] = ay
        x, y, th, c, s, vx, vy, om = body_step(
            wk[_WX, k], wk[_WY, k], wk[_WTH, k], wk[_WC, k], wk[_WS, k],
            wk[_WVX, k], wk[_WVY, k], wk[_WOM, k], ax, ay, wk[_WMZ, k] / wk[INERTIA, k], h,
        )
        wk[_WX, k] = x
        wk[_WY, k] = y
        wk[_WTH, k] = th
        wk[_WC, k] = c
        wk[_WS, k] = s
        wk[_WVX, k] = vx
        wk[_WVY, k] = vy
        wk[_WOM, k] = om


@njit(**_INLINE)
def _runaway_stage(wk, ws, w, h):
    # marks every lane whose state ran away (sim.substep.runaway) or whose wheels did
    for k in range(BLOCK):
        bad = runaway(wk[_WX, k], wk[_WY, k], wk[_WVX, k], wk[_WOM, k], h)
        for j in range(w):
            bad = bad | (not math.isfinite(ws[j, SPEED, k]))
        wk[_WBAD, k] = max(wk[_WBAD, k], 1.0 if bad else 0.0)


@njit(cache=True, error_model="numpy")
def advance_block(a, b, body, wheel, robot, duty, p, layout, segs, patches, floor_scale, h, steps):
    """Stage-by-stage driver: robots ``a`` to ``b - 1`` (at most BLOCK) through every sub-step."""
    wk = np.empty((ROWS, BLOCK))
    ws = np.empty((MAX_WHEELS, _WWHEEL, BLOCK))  # each wheel's rows
    m = b - a
    w = layout.shape[0]
    nload = len(COLUMNS)
    per_duty = w // duty.shape[1]  # 1, or wheels per side for a [left, right] duty
    kx, ky = second_moments(layout)
    any_transfer = False
    any_magic = False
    any_wall = False  # near a wall, or still in a contact
    any_patch = False
    # gather into the block scratch (row by row: each row is contiguous in the robots)
    for r in range(nload + w):
        for k in range(m):
            wk[r, k] = p[r, a + k]
    for k in range(m):
        i = a + k
        any_transfer = any_transfer or p[TRANSFER, i] > 0.5
        any_magic = any_magic or p[MODEL, i] != 0.0
        for r in range(3):
            wk[_WX + r, k] = body[0, i, r]
            wk[_WVX + r, k] = body[1, i, r]
        wk[_WC, k], wk[_WS, k] = heading_trig(robot, i, body[0, i, 2])
        wk[_WHEAT, k] = 0.0
        wk[_WBAD, k] = 0.0
        wk[_WAX, k] = robot[AX, i]
        wk[_WAY, k] = robot[AY, i]
        wk[_WWALL, k] = 0.0
        wk[_WPATCH, k] = 0.0
        any_wall = any_wall or robot[INCONTACT, i] > 0.0
    for j in range(w):
        for r in range(len(WHEEL_ROWS)):
            for k in range(m):
                ws[j, r, k] = wheel[r, a + k, j]
        for k in range(m):
            ws[j, _WDUTY, k] = duty[a + k, j // per_duty]
            ws[j, _WMU, k] = wk[MU, k] * floor_scale
    # broad phase
    if segs.shape[0] > 0 or patches.shape[0] > 0:
        for k in range(m):
            i = a + k
            wall, patch = broad_phase(body[0, i, 0], body[0, i, 1], body[1, i], p, i, layout, segs, patches, h * steps)
            wk[_WWALL, k] = 1.0 if wall else 0.0
            wk[_WPATCH, k] = 1.0 if patch else 0.0
            any_wall = any_wall or wall
            any_patch = any_patch or patch
    for k in range(m, BLOCK):
        for r in range(ROWS):
            wk[r, k] = wk[r, 0]
        for j in range(MAX_WHEELS):
            for r in range(_WWHEEL):
                ws[j, r, k] = ws[j, r, 0]
    for _ in range(steps):
        # battery (the current of the previous sub-step)
        for k in range(m):
            wk[_WVB, k] = 0.0
        for j in range(w):
            for k in range(m):
                wk[_WVB, k] += abs(ws[j, CURRENT, k])
        for k in range(m):
            wk[_WVB, k] = max(wk[V0, k] - wk[RB, k] * wk[_WVB, k], 0.0)
        # normal loads (the force row holds their sum for the moment)
        if any_transfer:
            for k in range(m):
                wk[_WFX, k] = 0.0
            for j in range(w):
                for k in range(m):
                    if wk[TRANSFER, k] > 0.5:
                        ws[j, LOAD, k] = shifted_load(wk, k, j, wk[_WAX, k], wk[_WAY, k], layout[j, 0] * kx, layout[j, 1] * ky)
                        wk[_WFX, k] += ws[j, LOAD, k]
            for k in range(m):
                if wk[TRANSFER, k] > 0.5:
                    static = 0.0
                    for j in range(w):
                        static += wk[nload + j, k]
                    scale = static / wk[_WFX, k] if wk[_WFX, k] > 0.0 else 1.0
                    for j in range(w):
                        ws[j, LOAD, k] *= scale
        for k in range(m):
            wk[_WFX, k] = 0.0
            wk[_WFY, k] = 0.0
            wk[_WMZ, k] = 0.0
        # wheels: the floor's friction under each, then motor, traction and spin
        for j in range(w):
            xj, yj = layout[j, 0], layout[j, 1]
            if any_patch:
                for k in range(m):
                    if wk[_WPATCH, k] != 0.0:
                        ws[j, _WMU, k] = floor_mu(
                            wk[MU, k] * floor_scale, wk[_WX, k] + wk[_WC, k] * xj - wk[_WS, k] * yj,
                            wk[_WY, k] + wk[_WS, k] * xj + wk[_WC, k] * yj, patches,
                        )
            wv = ws[j]
            # the model as a constant in each call, so the coulomb loop has no branch the
            # compiler cannot turn into vector selects
            if any_magic:
                _wheel_stage(wk, wv, xj, yj, layout[j, 2], layout[j, 3], layout[j, 4], h, True)
            else:
                _wheel_stage(wk, wv, xj, yj, layout[j, 2], layout[j, 3], layout[j, 4], h, False)
        # walls
        for k in range(m if any_wall else 0):
            depth = 0.0
            if wk[_WWALL, k] != 0.0:
                cfx, cfy, cmz, depth = contact_forces(
                    wk[_WX, k], wk[_WY, k], wk[_WC, k], wk[_WS, k], wk[_WVX, k], wk[_WVY, k],
                    wk[_WOM, k], wk[HALFL, k], wk[HALFW, k], wk[MASS, k], segs,
                )
                wk[_WFX, k] += cfx
                wk[_WFY, k] += cfy
                wk[_WMZ, k] += cmz
            contact_count(robot, a + k, depth, h)
        _body_stage(wk, h)
        _runaway_stage(wk, ws, w, h)
    # scatter back
    for k in range(m):
        i = a + k
        if wk[_WBAD, k] != 0.0:
            robot[DIVERGED, i] = 1.0
        robot[VB, i] = wk[_WVB, k]
        robot[ESLIP, i] += wk[_WHEAT, k]
        robot[AX, i] = wk[_WAX, k]
        robot[AY, i] = wk[_WAY, k]
        for r in range(3):
            body[0, i, r] = wk[_WX + r, k]
            body[1, i, r] = wk[_WVX + r, k]
        keep_heading_trig(robot, i, wk[_WTH, k], wk[_WC, k], wk[_WS, k])
    for j in range(w):
        for r in range(len(WHEEL_ROWS)):
            for k in range(m):
                wheel[r, a + k, j] = ws[j, r, k]
