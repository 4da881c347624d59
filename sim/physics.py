"""Batched chassis dynamics: one compiled sub-step kernel for N robots.

Per robot and sub-step ``h``:

1. battery: terminal voltage ``Vb = V0 - Rb * I_total`` (current of the previous sub-step);
2. motors: ``I = (duty * Vb - ke * G * w) / R`` clamped to the current limit (coast: open
   circuit at zero duty); wheel torque ``eta * G * (kt * I - tau_f sat(G w / 2))``;
3. normal loads: static, or shifted by the previous sub-step's acceleration (load transfer);
4. traction (:mod:`sim.traction`): force of the floor on each wheel from its slip velocity;
5. wheel spin, linearly implicit against the slip stiffness and the back-EMF damping
   (``w+ = w + h f(w) / (J + h df/dw)``), so light wheels on grippy floors stay stable at 1 ms;
6. contact: penalty springs between footprint corners and walls (:mod:`sim.contact`);
7. rigid body in the body frame with the rotating-frame terms
   ``dvx/dt = Fx/m + omega vy``, ``dvy/dt = Fy/m - omega vx``, ``domega/dt = Mz/I``; the pose
   moves along the exact arc of the new body velocity (``V(theta)`` of :mod:`planners.se2`).

Two broad-phase tests run once per call rather than once per sub-step: a robot farther from
every wall than its footprint's reach plus its travel skips the contact test, and only the
friction patches whose bounding box its wheels can reach are tested for its wheels.

Array layout (quantity axis first, so every public (N, ...) view is contiguous):

* ``body`` (2, N, 3): pose [x, y, heading] (field frame), velocity [vx, vy, omega] (body frame);
* ``wheel`` (7, N, W): rows :data:`WHEEL_ROWS`;
* ``robot`` (8, N): rows :data:`ROBOT_ROWS`;
* ``params`` (N, K + W): the columns of :data:`COLUMNS`, then each wheel's static load [N];
* ``layout`` (W, 5): wheel x, y (body frame), grip direction x, y and rim-speed factor;
* ``segs`` (S, 5): wall segments x0, y0, x1, y1, 1 where the floor lies left of the segment;
* ``patches`` (P, 6 + 2 V): vertex count, friction scale, bounding box (x0, y0, x1, y1),
  then the vertices x, y.
"""

from __future__ import annotations

import math

from numba import njit, prange

from planners.se2 import _arc_coefficients, wrap_one
from sim.contact import contact_forces
from sim.traction import saturate, wheel_force

G0 = 9.80665

#: per-robot parameter columns
COLUMNS = (
    "mass", "inertia", "mu", "slip_speed", "wheel_radius", "gear_ratio", "gear_efficiency",
    "kt", "ke", "R", "tau_f", "current_limit", "battery_voltage", "battery_resistance",
    "wheel_inertia", "rolling_resistance", "roller_friction", "coast", "model",
    "mf_b", "mf_c", "mf_e", "half_length", "half_width", "load_transfer", "cg_height",
)
C = {name: i for i, name in enumerate(COLUMNS)}
#: rows of the (7, N, W) wheel state
WHEEL_ROWS = ("speed", "angle", "current", "slip", "force_x", "force_y", "load")
#: rows of the (8, N) robot state
ROBOT_ROWS = (
    "battery_voltage", "peak_penetration", "slip_energy", "in_contact", "contacts", "diverged",
    "accel_x", "accel_y",
)
_SPEED, _ANGLE, _CURRENT, _SLIP, _FX, _FY, _LOAD = range(7)
_VB, _PEAK, _ESLIP, _INCONTACT, _CONTACTS, _DIVERGED, _AX, _AY = range(8)
#: clearance time that ends a contact [s]
CONTACT_CLEAR = 0.05
#: how far a robot may travel in one call beyond its speed times the call's length [m]
_REACH_MARGIN = 0.02


@njit(cache=True, inline="always")
def _inside(px, py, patch):
    # even-odd point-in-polygon on the packed vertices of one patch
    count = int(patch[0])
    hit = False
    j = count - 1
    for i in range(count):
        xi, yi = patch[6 + 2 * i], patch[7 + 2 * i]
        xj, yj = patch[6 + 2 * j], patch[7 + 2 * j]
        if (yi > py) != (yj > py) and px < (xj - xi) * (py - yi) / (yj - yi) + xi:
            hit = not hit
        j = i
    return hit


@njit(cache=True, inline="always")
def _segment_distance(px, py, seg):
    ax, ay = seg[0], seg[1]
    ex, ey = seg[2] - ax, seg[3] - ay
    ll = ex * ex + ey * ey
    u = 0.0 if ll == 0.0 else min(max(((px - ax) * ex + (py - ay) * ey) / ll, 0.0), 1.0)
    dx = px - ax - u * ex
    dy = py - ay - u * ey
    return math.sqrt(dx * dx + dy * dy)


@njit(cache=True, inline="always")
def _step_robot(i, body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps):
    """Advance robot ``i`` by ``steps`` sub-steps of ``h`` seconds (its rows updated in place)."""
    if robot[_DIVERGED, i] != 0.0:
        return
    w = layout.shape[0]
    per_duty = w // duty.shape[1]  # 1, or wheels per side for a [left, right] duty
    p = params[i]
    m = p[0]
    inertia = p[1]
    mu0 = p[2]
    vs = p[3]
    r = p[4]
    gr = p[5]
    eta = p[6]
    kt, ke, tau_f = p[7], p[8], p[10]
    inv_res = 1.0 / p[9]
    ilim = p[11]
    j_eff = p[14]
    crr, roller = p[15], p[16]
    coast = p[17] > 0.5
    model = int(p[18])
    transfer = p[24] > 0.5
    cg_h = p[25]
    nload = len(COLUMNS)
    pose = body[0, i]
    vel = body[1, i]
    # second moments of the wheel positions, for load transfer (same linear distribution as
    # the static loads: sim.world.static_loads)
    sxx = 0.0
    syy = 0.0
    for j in range(w):
        sxx += layout[j, 0] * layout[j, 0]
        syy += layout[j, 1] * layout[j, 1]
    # broad phase: can the footprint reach a wall, can a wheel reach a patch, this call?
    travel = (abs(vel[0]) + abs(vel[1]) + abs(vel[2]) * math.hypot(p[22], p[23])) * h * steps
    reach = math.hypot(p[22], p[23]) + 2.0 * travel + _REACH_MARGIN
    near_wall = False
    for q in range(segs.shape[0]):
        if _segment_distance(pose[0], pose[1], segs[q]) < reach:
            near_wall = True
            break
    wheel_reach = 2.0 * travel + _REACH_MARGIN
    for j in range(w):
        wheel_reach = max(wheel_reach, math.hypot(layout[j, 0], layout[j, 1]) + 2.0 * travel + _REACH_MARGIN)
    npatch = patches.shape[0]
    every_patch = npatch > 64  # too many for the bit mask: test them all
    near = 0
    for q in range(min(npatch, 64)):
        pq = patches[q]
        if (
            pose[0] + wheel_reach > pq[2] and pose[0] - wheel_reach < pq[4]
            and pose[1] + wheel_reach > pq[3] and pose[1] - wheel_reach < pq[5]
        ):
            near |= 1 << q
    any_patch = every_patch or near != 0
    c = math.cos(pose[2])
    s = math.sin(pose[2])
    for _ in range(steps):
        total = 0.0
        for j in range(w):
            total += abs(wheel[_CURRENT, i, j])
        vb = max(p[12] - p[13] * total, 0.0)
        robot[_VB, i] = vb
        fx = 0.0
        fy = 0.0
        mz = 0.0
        load_sum = 0.0
        for j in range(w):
            load = p[nload + j]
            if transfer:
                # body-frame acceleration of the previous sub-step lifts the leading wheels
                # (Gillespie 1992, ch. 2: dW = m a h / L per axle)
                load -= m * cg_h * (
                    (robot[_AX, i] * layout[j, 0] / sxx if sxx > 0.0 else 0.0)
                    + (robot[_AY, i] * layout[j, 1] / syy if syy > 0.0 else 0.0)
                )
                load = max(load, 0.0)
            wheel[_LOAD, i, j] = load
            load_sum += load
        if transfer and load_sum > 0.0:
            # a lifted wheel's share goes back to the others: the loads still carry the weight
            static = 0.0
            for j in range(w):
                static += p[nload + j]
            for j in range(w):
                wheel[_LOAD, i, j] *= static / load_sum
        for j in range(w):
            xj = layout[j, 0]
            yj = layout[j, 1]
            mu = mu0 * floor_scale
            if any_patch:
                # floor friction where this wheel touches
                gx = pose[0] + c * xj - s * yj
                gy = pose[1] + s * xj + c * yj
                for q in range(npatch):
                    if (every_patch or (near >> q) & 1) and _inside(gx, gy, patches[q]):
                        mu = mu0 * floor_scale * patches[q, 1]
            load = wheel[_LOAD, i, j]
            # motor
            u = duty[i, j // per_duty]
            u = min(max(u, -1.0), 1.0)
            wsp = wheel[_SPEED, i, j]
            wm = gr * wsp
            open_circuit = coast and u == 0.0
            if open_circuit:
                amps = 0.0
            else:
                amps = (u * vb - ke * wm) * inv_res
                amps = min(max(amps, -ilim), ilim)
            wheel[_CURRENT, i, j] = amps
            # motor friction, regularised over 2 rad/s at the shaft
            th, dth = saturate(wm / 2.0)
            tau = eta * gr * (kt * amps - tau_f * th)
            # -d tau / d w: friction, and back-EMF unless coasting or current-limited
            dtau = eta * gr * gr * tau_f * dth / 2.0
            if not open_circuit and abs(amps) < ilim:
                dtau += eta * gr * gr * kt * ke * inv_res
            gdx, gdy, gsc = layout[j, 2], layout[j, 3], layout[j, 4]
            f_x, f_y, f_roll, k_roll, vsl = wheel_force(
                vel[0] - vel[2] * yj, vel[1] + vel[2] * xj, wsp * r, gdx, gdy, gsc,
                mu, load, vs, crr, roller, model, p[19], p[20], p[21],
            )
            # wheel spin, linearly implicit in w: J dw/dt = tau - r_eff * F_roll(w)
            reff = r * gsc
            dw = h * (tau - reff * f_roll) / (j_eff + h * (dtau + reff * k_roll * reff))
            wsp += dw
            wheel[_SPEED, i, j] = wsp
            wheel[_ANGLE, i, j] += h * wsp
            # force on the body after the implicit correction of the rolling component
            corr = k_roll * dw * reff
            f_x += corr * gdx
            f_y += corr * gdy
            wheel[_FX, i, j] = f_x
            wheel[_FY, i, j] = f_y
            wheel[_SLIP, i, j] = vsl
            robot[_ESLIP, i] += h * abs(f_roll * vsl)
            fx += f_x
            fy += f_y
            mz += xj * f_y - yj * f_x
        depth = 0.0
        if near_wall:
            cfx, cfy, cmz, depth = contact_forces(
                pose[0], pose[1], c, s, vel[0], vel[1], vel[2], p[22], p[23], m, segs,
            )
            fx += cfx
            fy += cfy
            mz += cmz
        # a contact is new once the robot has been clear of every wall for CONTACT_CLEAR
        # seconds (a bounce or a graze is one contact): the flag counts down while clear
        if depth > 0.0:
            if robot[_INCONTACT, i] <= 0.0:
                robot[_CONTACTS, i] += 1.0
            robot[_INCONTACT, i] = 1.0
            robot[_PEAK, i] = max(robot[_PEAK, i], depth)
        elif robot[_INCONTACT, i] > 0.0:
            robot[_INCONTACT, i] = max(robot[_INCONTACT, i] - h / CONTACT_CLEAR, 0.0)
        robot[_AX, i] = fx / m
        robot[_AY, i] = fy / m
        om = vel[2]
        vx = vel[0] + h * (fx / m + om * vel[1])
        vy = vel[1] + h * (fy / m - om * vel[0])
        om = om + h * mz / inertia
        vel[0] = vx
        vel[1] = vy
        vel[2] = om
        # the exact arc: body displacement V(dth) [vx, vy] h, then rotate by dth
        dth = om * h
        a, b = _arc_coefficients(dth)
        dx = (a * vx - b * vy) * h
        dy = (b * vx + a * vy) * h
        pose[0] += c * dx - s * dy
        pose[1] += s * dx + c * dy
        pose[2] = wrap_one(pose[2] + dth)
        # cos and sin of the new heading by the same rotation: sin dth = A dth, cos = 1 - B dth
        sd = a * dth
        cd = 1.0 - b * dth
        c, s = c * cd - s * sd, s * cd + c * sd
        ok = math.isfinite(pose[0]) and math.isfinite(pose[1]) and math.isfinite(om)
        for j in range(w):
            ok = ok and math.isfinite(wheel[_SPEED, i, j])
        if not ok or abs(vx) > 1e3 or abs(om) > 1e4:
            robot[_DIVERGED, i] = 1.0
            break


@njit(cache=True)
def step_kernel(body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps):
    """Advance every robot ``steps`` sub-steps of ``h`` seconds (arrays updated in place)."""
    for i in range(body.shape[1]):
        _step_robot(i, body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps)


@njit(cache=True, parallel=True)
def step_kernel_parallel(body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps):
    """:func:`step_kernel` with the robots spread over threads (each robot writes only its own
    entries, so the result is the same bit for bit)."""
    for i in prange(body.shape[1]):
        _step_robot(i, body, wheel, robot, duty, params, layout, segs, patches, floor_scale, h, steps)
