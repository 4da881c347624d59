"""Batched chassis dynamics: one compiled sub-step kernel for N robots.

Per robot and sub-step ``h``:

1. battery: terminal voltage ``Vb = V0 - Rb * I_total`` (current of the previous sub-step);
2. motors: ``I = (duty * Vb - ke * G * w) / R`` clamped to the current limit (coast: open
   circuit at zero duty); wheel torque ``eta * G * (kt * I - tau_f)``;
3. traction (:mod:`sim.traction`): force of the floor on each wheel from its slip velocity;
4. wheel spin, linearly implicit against the slip stiffness and the back-EMF damping
   (``w+ = w + h f(w) / (J + h df/dw)``), so light wheels on grippy floors stay stable at 1 ms;
5. contact: penalty springs between footprint corners and walls (:mod:`sim.contact`);
6. rigid body in the body frame with the rotating-frame terms
   ``dvx/dt = Fx/m + omega vy``, ``dvy/dt = Fy/m - omega vx``, ``domega/dt = Mz/I``; the pose
   moves along the exact arc of the new body velocity (:func:`planners.se2.exp_one`).

Parameters are rows of a (N, K) matrix (column indices in :data:`COLUMNS`) so randomised
robots step together.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from planners.se2 import compose_one, exp_one
from sim.contact import contact_forces
from sim.traction import wheel_force

G0 = 9.80665

#: per-robot parameter columns
COLUMNS = (
    "mass", "inertia", "mu", "slip_speed", "wheel_radius", "gear_ratio", "gear_efficiency",
    "kt", "ke", "R", "tau_f", "current_limit", "battery_voltage", "battery_resistance",
    "wheel_inertia", "rolling_resistance", "roller_friction", "coast", "model",
    "mf_b", "mf_c", "mf_e", "half_length", "half_width",
)
C = {name: i for i, name in enumerate(COLUMNS)}


@njit(cache=True)
def _inside(px, py, poly, count):
    hit = False
    j = count - 1
    for i in range(count):
        xi, yi = poly[i, 0], poly[i, 1]
        xj, yj = poly[j, 0], poly[j, 1]
        if (yi > py) != (yj > py) and px < (xj - xi) * (py - yi) / (yj - yi) + xi:
            hit = not hit
        j = i
    return hit


@njit(cache=True)
def _step_robot(
    i, pose, vel, wspeed, wangle, current, vbatt, slip, wforce, state_f, counters,
    duty, params, wheel_xy, grip, loads, segs, seg_free_left,
    patches, patch_counts, patch_scale, floor_scale, h, steps,
):
    """Advance robot ``i`` by ``steps`` sub-steps of ``h`` seconds (its rows updated in place)."""
    w = wspeed.shape[1]
    if counters[i, 1] != 0:
        return
    p = params[i]
    m = p[0]
    inertia = p[1]
    r = p[4]
    gr = p[5]
    eta = p[6]
    kt, ke, res, tau_f = p[7], p[8], p[9], p[10]
    ilim = p[11]
    coast = p[17] > 0.5
    j_eff = p[14]
    for _ in range(steps):
        total = 0.0
        for j in range(w):
            total += abs(current[i, j])
        vb = p[12] - p[13] * total
        if vb < 0.0:
            vb = 0.0
        vbatt[i] = vb
        fx = 0.0
        fy = 0.0
        mz = 0.0
        c = math.cos(pose[i, 2])
        s = math.sin(pose[i, 2])
        for j in range(w):
            xj = wheel_xy[j, 0]
            yj = wheel_xy[j, 1]
            # floor friction where this wheel touches
            gx = pose[i, 0] + c * xj - s * yj
            gy = pose[i, 1] + s * xj + c * yj
            scale = floor_scale
            for q in range(patch_counts.shape[0]):
                if _inside(gx, gy, patches[q], patch_counts[q]):
                    scale = floor_scale * patch_scale[q]
            mu = p[2] * scale
            load = loads[i, j]
            # motor
            wm = gr * wspeed[i, j]
            if coast and duty[i, j] == 0.0:
                amps = 0.0
            else:
                amps = (duty[i, j] * vb - ke * wm) / res
                if amps > ilim:
                    amps = ilim
                elif amps < -ilim:
                    amps = -ilim
            current[i, j] = amps
            # motor friction, regularised over 2 rad/s at the shaft
            th = math.tanh(wm / 2.0)
            fric = tau_f * th
            tau = eta * gr * (kt * amps - fric)
            # -d tau / d w: friction, and back-EMF unless coasting or current-limited
            # d/dw tanh(w/2) = (1 - tanh^2) / 2
            dtau = eta * gr * gr * tau_f * (1.0 - th * th) / 2.0
            if not (coast and duty[i, j] == 0.0) and abs(amps) < ilim:
                dtau += eta * gr * gr * kt * ke / res
            vcx = vel[i, 0] - vel[i, 2] * yj
            vcy = vel[i, 1] + vel[i, 2] * xj
            f_x, f_y, f_roll, k_roll, vsl = wheel_force(
                vcx, vcy, wspeed[i, j] * r, grip[j, 0], grip[j, 1], grip[j, 2],
                mu, load, p[3], p[15], p[16], int(p[18]), p[19], p[20], p[21],
            )
            # wheel spin, linearly implicit in w: J dw/dt = tau - r_eff * F_roll(w)
            reff = r * grip[j, 2]
            num = tau - reff * f_roll
            den = j_eff + h * (dtau + reff * k_roll * r * grip[j, 2])
            dw = h * num / den
            wspeed[i, j] += dw
            wangle[i, j] += h * wspeed[i, j]
            # force on the body after the implicit correction of the rolling component
            corr = k_roll * dw * r * grip[j, 2]
            f_x += corr * grip[j, 0]
            f_y += corr * grip[j, 1]
            wforce[i, j, 0] = f_x
            wforce[i, j, 1] = f_y
            slip[i, j] = vsl
            state_f[i, 1] += h * abs(f_roll * vsl)
            fx += f_x
            fy += f_y
            mz += xj * f_y - yj * f_x
        cfx, cfy, cmz, depth = contact_forces(
            pose[i, 0], pose[i, 1], pose[i, 2], vel[i, 0], vel[i, 1], vel[i, 2],
            p[22], p[23], m, segs, seg_free_left,
        )
        fx += cfx
        fy += cfy
        mz += cmz
        if depth > 0.0:
            if state_f[i, 2] == 0.0:
                counters[i, 0] += 1
            state_f[i, 2] = 1.0
            if depth > state_f[i, 0]:
                state_f[i, 0] = depth
        elif depth < -1e-4:
            state_f[i, 2] = 0.0
        om = vel[i, 2]
        vx = vel[i, 0] + h * (fx / m + om * vel[i, 1])
        vy = vel[i, 1] + h * (fy / m - om * vel[i, 0])
        vel[i, 0] = vx
        vel[i, 1] = vy
        vel[i, 2] = om + h * mz / inertia
        dx, dy, dth = exp_one(vel[i, 0] * h, vel[i, 1] * h, vel[i, 2] * h)
        pose[i, 0], pose[i, 1], pose[i, 2] = compose_one(pose[i, 0], pose[i, 1], pose[i, 2], dx, dy, dth)
        ok = np.isfinite(pose[i, 0]) and np.isfinite(pose[i, 1]) and np.isfinite(vel[i, 2])
        for j in range(w):
            ok = ok and np.isfinite(wspeed[i, j])
        if not ok or abs(vel[i, 0]) > 1e3 or abs(vel[i, 2]) > 1e4:
            counters[i, 1] = 1
            break


@njit(cache=True)
def step_kernel(
    pose, vel, wspeed, wangle, current, vbatt, slip, wforce, state_f, counters,
    duty, params, wheel_xy, grip, loads, segs, seg_free_left,
    patches, patch_counts, patch_scale, floor_scale, h, steps,
):
    """Advance every robot ``steps`` sub-steps of ``h`` seconds (arrays updated in place).

    state_f columns: 0 peak penetration, 1 slip energy, 2 in-contact flag;
    counters columns: 0 contact count, 1 diverged flag.
    """
    for i in range(wspeed.shape[0]):
        _step_robot(
            i, pose, vel, wspeed, wangle, current, vbatt, slip, wforce, state_f, counters,
    duty, params, wheel_xy, grip, loads, segs, seg_free_left,
    patches, patch_counts, patch_scale, floor_scale, h, steps,
        )

