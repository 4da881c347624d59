"""Contact between a robot's rectangular footprint and the field's walls (penalty springs).

Two cases are checked each sub-step: a footprint corner on the wrong side of a wall segment,
and a wall vertex (a pillar's corner) inside the footprint. Each contributes a spring-damper
normal force (stiffness :data:`STIFFNESS`, damping :data:`DAMPING_RATIO` of critical for the
robot's mass) and Coulomb friction along the wall (:data:`WALL_MU`, regularised over 2 cm/s by
:func:`sim.traction.saturate`). The penetration that
results is a few millimetres at full drive force, so a robot pushing a wall stalls at its
current limit instead of tunnelling.
"""

from __future__ import annotations

import math

from numba import njit

from sim.traction import saturate

STIFFNESS = 4.0e4  # N/m
DAMPING_RATIO = 0.7
WALL_MU = 0.3
_MAX_DEPTH = 0.15  # m: deeper crossings belong to the far side of a wall, not a contact


@njit(cache=True, error_model="numpy")
def contact_forces(x, y, c, s, vx, vy, om, half_len, half_wid, mass, segs):
    """Total contact force (body frame), moment and deepest penetration of one robot.

    Parameters
    ----------
    x, y : float — position, field frame
    c, s : float — cosine and sine of the heading
    vx, vy, om : float — body velocity
    half_len, half_wid : float — half the footprint [m]
    mass : float — [kg], for the damping
    segs : ndarray (S, 5) — wall segments x0, y0, x1, y1 and 1 where the free floor lies
        left of the segment's direction, else 0

    Returns
    -------
    fx, fy, mz : float — body-frame force [N] and moment [N m]
    depth : float — deepest penetration [m] (0 when clear)
    """
    damp = 2.0 * DAMPING_RATIO * math.sqrt(STIFFNESS * mass)
    fx = 0.0
    fy = 0.0
    mz = 0.0
    deepest = 0.0
    for corner in range(4):
        bx = half_len if corner < 2 else -half_len
        by = half_wid if corner % 2 == 0 else -half_wid
        px = x + c * bx - s * by
        py = y + s * bx + c * by
        best = 0.0
        nx = 0.0
        ny = 0.0
        for j in range(segs.shape[0]):
            ax, ay = segs[j, 0], segs[j, 1]
            ex, ey = segs[j, 2] - ax, segs[j, 3] - ay
            ll = math.sqrt(ex * ex + ey * ey)
            if ll == 0.0:
                continue
            u = ((px - ax) * ex + (py - ay) * ey) / (ll * ll)
            if u < 0.0 or u > 1.0:
                continue
            d = (ex * (py - ay) - ey * (px - ax)) / ll  # > 0 left of the segment
            free_left = segs[j, 4] > 0.5
            depth = -d if free_left else d
            if 0.0 < depth < _MAX_DEPTH and depth > best:
                best = depth
                sign = 1.0 if free_left else -1.0
                nx = -ey / ll * sign
                ny = ex / ll * sign
        if best > 0.0:
            # velocity of the corner, field frame
            bvx = vx - om * by
            bvy = vy + om * bx
            wx = c * bvx - s * bvy
            wy = s * bvx + c * bvy
            vin = -(wx * nx + wy * ny)
            fn = STIFFNESS * best + damp * vin
            if fn < 0.0:
                fn = 0.0
            tx, ty = -ny, nx
            vt = wx * tx + wy * ty
            ft = -WALL_MU * fn * saturate(vt / 0.02)[0]
            gx = fn * nx + ft * tx
            gy = fn * ny + ft * ty
            lx = c * gx + s * gy
            ly = -s * gx + c * gy
            fx += lx
            fy += ly
            mz += bx * ly - by * lx
            if best > deepest:
                deepest = best
    # wall vertices inside the footprint
    for j in range(segs.shape[0]):
        qx = segs[j, 0] - x
        qy = segs[j, 1] - y
        bx = c * qx + s * qy
        by = -s * qx + c * qy
        if abs(bx) < half_len and abs(by) < half_wid:
            dxp = half_len - abs(bx)
            dyp = half_wid - abs(by)
            if dxp < dyp:
                depth = dxp
                nbx = -1.0 if bx > 0 else 1.0
                nby = 0.0
            else:
                depth = dyp
                nbx = 0.0
                nby = -1.0 if by > 0 else 1.0
            if depth > _MAX_DEPTH:
                continue
            vpx = vx - om * by
            vpy = vy + om * bx
            vin = -(vpx * nbx + vpy * nby)
            fn = STIFFNESS * depth + damp * vin
            if fn < 0.0:
                fn = 0.0
            vt = -vpx * nby + vpy * nbx
            ft = -WALL_MU * fn * saturate(vt / 0.02)[0]
            lx = fn * nbx - ft * nby
            ly = fn * nby + ft * nbx
            fx += lx
            fy += ly
            mz += bx * ly - by * lx
            if depth > deepest:
                deepest = depth
    return fx, fy, mz, deepest
