"""The equations of one sub-step of one robot, as scalar compiled functions.

:mod:`sim.physics` steps a batch through these in one of two orders (robot by robot, or stage
by stage over a block of robots); since both call the same functions with the same numbers,
a robot's result does not depend on the order or the batch around it.

Per wheel (:func:`wheel_step`): the motor current ``I = (duty * Vb - ke * G * w) / R`` clamped
to the current limit (coast: open circuit at zero duty), the wheel torque
``eta * G * (kt * I - tau_f sat(G w / 2))``, the floor's force from the slip
(:func:`sim.traction.wheel_force`), and the wheel spin, linearly implicit against the slip
stiffness and the back-EMF damping (``w+ = w + h f(w) / (J + h df/dw)``), so light wheels on
grippy floors stay stable at 1 ms.

Per body (:func:`body_step`): the rigid body in the body frame with the rotating-frame terms
``dvx/dt = Fx/m + omega vy``, ``dvy/dt = Fy/m - omega vx``, ``domega/dt = Mz/I``; the pose
moves along the exact arc of the new body velocity (``V(theta)`` of :mod:`planners.se2`).
"""

from __future__ import annotations

import math

from numba import njit

from planners.se2 import SERIES_MAX, arc_series
from sim.traction import saturate, wheel_force

#: per-robot parameter rows of the (K + W, N) parameter block
COLUMNS = (
    "mass", "inertia", "mu", "slip_speed", "wheel_radius", "gear_ratio", "gear_efficiency",
    "kt", "ke", "R", "tau_f", "current_limit", "battery_voltage", "battery_resistance",
    "wheel_inertia", "rolling_resistance", "roller_friction", "coast", "model",
    "mf_b", "mf_c", "mf_e", "half_length", "half_width", "load_transfer", "cg_height",
)
(
    MASS, INERTIA, MU, VS, RADIUS, GEAR, ETA, KT, KE, RES, TAUF, ILIM, V0, RB,
    JW, CRR, ROLLER, COAST, MODEL, MF_B, MF_C, MF_E, HALFL, HALFW, TRANSFER, CGH,
) = range(len(COLUMNS))

#: rows of the (7, N, W) wheel state
WHEEL_ROWS = ("speed", "angle", "current", "slip", "force_x", "force_y", "load")
SPEED, ANGLE, CURRENT, SLIP, FX, FY, LOAD = range(7)
#: rows of the (8, N) robot state
ROBOT_ROWS = (
    "battery_voltage", "peak_penetration", "slip_energy", "in_contact", "contacts", "diverged",
    "accel_x", "accel_y", "heading_seen", "cos_heading", "sin_heading",
)
VB, PEAK, ESLIP, INCONTACT, CONTACTS, DIVERGED, AX, AY, HSEEN, HCOS, HSIN = range(11)
#: clearance time that ends a contact [s]
CONTACT_CLEAR = 0.05
#: how far a robot may travel in one call beyond twice its speed times the call's length [m]
REACH_MARGIN = 0.02

_KW = dict(cache=True, error_model="numpy", forceinline=True)


@njit(**_KW)
def wheel_step(u, vb, wsp, mu, load, vx, vy, om, p, i, xj, yj, gdx, gdy, gsc, h, model):
    """Motor, traction and implicit spin of one wheel for one sub-step.

    Parameters
    ----------
    u : float — duty in [-1, 1]; vb : float — battery terminal voltage [V]
    wsp : float — wheel speed [rad/s]; mu, load : float — floor friction, normal load [N]
    vx, vy, om : float — body velocity [m/s, m/s, rad/s], body frame
    p : ndarray (K + W, N) — parameter block; i : int — the robot's column
    xj, yj, gdx, gdy, gsc : float — wheel position, grip direction, rim-speed factor
    h : float — sub-step [s]; model : int — 0 coulomb, 1 magic formula

    Returns
    -------
    wsp : float — new wheel speed; amps : float — motor current [A]; slip : float [m/s]
    fx, fy : float — floor force on the robot at this wheel [N], body frame
    heat : float — energy the slip dissipated this sub-step [J]
    """
    gr = p[GEAR, i]
    eta = p[ETA, i]
    kt, ke, tau_f = p[KT, i], p[KE, i], p[TAUF, i]
    inv_res = 1.0 / p[RES, i]
    ilim = p[ILIM, i]
    r = p[RADIUS, i]
    wm = gr * wsp
    open_circuit = p[COAST, i] > 0.5 and u == 0.0
    amps = min(max((u * vb - ke * wm) * inv_res, -ilim), ilim)
    if open_circuit:
        amps = 0.0
    # motor friction, regularised over 2 rad/s at the shaft
    th, dth = saturate(wm * 0.5)
    tau = eta * gr * (kt * amps - tau_f * th)
    # -d tau / d w: friction, and back-EMF unless coasting or current-limited
    dtau = eta * gr * gr * tau_f * dth * 0.5
    if not open_circuit and abs(amps) < ilim:
        dtau += eta * gr * gr * kt * ke * inv_res
    f_x, f_y, f_roll, k_roll, slip = wheel_force(
        vx - om * yj, vy + om * xj, wsp * r, gdx, gdy, gsc, mu, load,
        p[VS, i], p[CRR, i], p[ROLLER, i], model, p[MF_B, i], p[MF_C, i], p[MF_E, i],
    )
    # wheel spin, linearly implicit in w: J dw/dt = tau - r_eff * F_roll(w)
    reff = r * gsc
    dw = h * (tau - reff * f_roll) / (p[JW, i] + h * (dtau + reff * k_roll * reff))
    # force on the body after the implicit correction of the rolling component
    corr = k_roll * dw * reff
    return wsp + dw, amps, slip, f_x + corr * gdx, f_y + corr * gdy, h * abs(f_roll * slip)


@njit(**_KW)
def body_step(x, y, th, c, s, vx, vy, om, ax, ay, alpha, h):
    """Rigid body: velocity from the accelerations, then the pose along the exact arc.

    ``c``, ``s`` are the cosine and sine of ``th``; ``ax``, ``ay`` = force / mass and
    ``alpha`` = moment / inertia. Returns the new ``x, y, th, c, s, vx, vy, om``.
    """
    vx1 = vx + h * (ax + om * vy)
    vy1 = vy + h * (ay - om * vx)
    om1 = om + h * alpha
    dth = om1 * h
    # V(dth) by its series: exact to double precision up to SERIES_MAX, which no robot turns
    # in one sub-step short of a runaway (see runaway)
    a, b = arc_series(min(max(dth, -SERIES_MAX), SERIES_MAX))
    dx = (a * vx1 - b * vy1) * h
    dy = (b * vx1 + a * vy1) * h
    x1 = x + c * dx - s * dy
    y1 = y + s * dx + c * dy
    th1 = th + dth
    # a sub-step turns less than a half turn: one correction wraps it to (-pi, pi]
    if th1 > math.pi:
        th1 -= 2.0 * math.pi
    elif th1 <= -math.pi:
        th1 += 2.0 * math.pi
    # cos and sin of the new heading by the same rotation: sin dth = A dth, cos = 1 - B dth
    sd = a * dth
    cd = 1.0 - b * dth
    return x1, y1, th1, c * cd - s * sd, s * cd + c * sd, vx1, vy1, om1


@njit(**_KW)
def runaway(x, y, vx, om, h):
    """A non-finite state, faster than 1 km/s, or a turn beyond SERIES_MAX in one sub-step."""
    # & rather than "and": no branches, so loops over robots vectorise through it
    ok = math.isfinite(x) & math.isfinite(y) & math.isfinite(om) & (abs(vx) <= 1e3) & (abs(om * h) <= SERIES_MAX)
    return not ok


@njit(**_KW)
def inside(px, py, patch):
    """Even-odd point-in-polygon on the packed vertices of one patch (see sim.physics)."""
    count = int(patch[0])
    hit = False
    j = count - 1
    for k in range(count):
        xi, yi = patch[6 + 2 * k], patch[7 + 2 * k]
        xj, yj = patch[6 + 2 * j], patch[7 + 2 * j]
        if (yi > py) != (yj > py) and px < (xj - xi) * (py - yi) / (yj - yi) + xi:
            hit = not hit
        j = k
    return hit


@njit(**_KW)
def floor_mu(mu, gx, gy, patches):
    """Friction under a wheel at (gx, gy): ``mu`` times the last patch there (if any)."""
    out = mu
    for s in range(patches.shape[0]):
        if inside(gx, gy, patches[s]):
            out = mu * patches[s, 1]
    return out


@njit(**_KW)
def segment_distance(px, py, seg):
    """Distance from a point to a wall segment ``seg`` = (x0, y0, x1, y1, ...)."""
    ax, ay = seg[0], seg[1]
    ex, ey = seg[2] - ax, seg[3] - ay
    ll = ex * ex + ey * ey
    u = 0.0 if ll == 0.0 else min(max(((px - ax) * ex + (py - ay) * ey) / ll, 0.0), 1.0)
    dx = px - ax - u * ex
    dy = py - ay - u * ey
    return math.sqrt(dx * dx + dy * dy)


@njit(cache=True, error_model="numpy")
def broad_phase(x, y, vel, p, i, layout, segs, patches, span_time):
    """Can the footprint reach a wall, and can a wheel reach a patch's box, in ``span_time``?"""
    span = math.sqrt(p[HALFL, i] * p[HALFL, i] + p[HALFW, i] * p[HALFW, i])
    travel = 2.0 * (abs(vel[0]) + abs(vel[1]) + abs(vel[2]) * span) * span_time + REACH_MARGIN
    wall = False
    for s in range(segs.shape[0]):
        if segment_distance(x, y, segs[s]) < span + travel:
            wall = True
            break
    reach = travel
    for j in range(layout.shape[0]):
        reach = max(reach, math.sqrt(layout[j, 0] * layout[j, 0] + layout[j, 1] * layout[j, 1]) + travel)
    patch = False
    for s in range(patches.shape[0]):
        ps = patches[s]
        patch = patch or (x + reach > ps[2] and x - reach < ps[4] and y + reach > ps[3] and y - reach < ps[5])
    return wall, patch


@njit(cache=True, error_model="numpy")
def second_moments(layout):
    # 1 / sum x^2 and 1 / sum y^2 of the wheel positions (0 when all lie on that axis), for
    # load transfer: the same linear distribution as the static loads (sim.world.static_loads)
    sxx = 0.0
    syy = 0.0
    for j in range(layout.shape[0]):
        sxx += layout[j, 0] * layout[j, 0]
        syy += layout[j, 1] * layout[j, 1]
    return (1.0 / sxx if sxx > 0.0 else 0.0), (1.0 / syy if syy > 0.0 else 0.0)


@njit(cache=True, error_model="numpy", forceinline=True)
def shifted_load(p, i, j, ax, ay, kx, ky):
    # the leading wheels lift by m h (a_x x_j / sum x^2 + a_y y_j / sum y^2)
    return max(p[len(COLUMNS) + j, i] - p[TRANSFER, i] * p[MASS, i] * p[CGH, i] * (ax * kx + ay * ky), 0.0)


@njit(cache=True, error_model="numpy")
def contact_count(robot, i, depth, h):
    # a contact is new once the robot has been clear of every wall for CONTACT_CLEAR seconds
    # (a bounce or a graze is one contact): the flag counts down while clear
    if depth > 0.0:
        if robot[INCONTACT, i] <= 0.0:
            robot[CONTACTS, i] += 1.0
        robot[INCONTACT, i] = 1.0
        robot[PEAK, i] = max(robot[PEAK, i], depth)
    elif robot[INCONTACT, i] > 0.0:
        robot[INCONTACT, i] = max(robot[INCONTACT, i] - h / CONTACT_CLEAR, 0.0)


@njit(**_KW)
def heading_trig(robot, i, th):
    """Cosine and sine of robot ``i``'s heading ``th``: those carried from the end of its last
    step when the heading is still the one it ended with (two fewer trigonometric calls per
    robot and call), else computed."""
    if th == robot[HSEEN, i]:
        return robot[HCOS, i], robot[HSIN, i]
    return math.cos(th), math.sin(th)


@njit(**_KW)
def keep_heading_trig(robot, i, th, c, s):
    """Carry the heading's cosine and sine to the next step (see heading_trig)."""
    robot[HSEEN, i] = th
    robot[HCOS, i] = c
    robot[HSIN, i] = s
