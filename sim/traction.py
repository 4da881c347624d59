"""Wheel-ground force from slip: regularised Coulomb and the Pacejka magic formula.

Each wheel has a grip direction ``g`` (body frame) along which it drives: the rolling
direction for skid and differential wheels; for a mecanum wheel with 45° rollers the
direction the rollers cannot roll, ``g = (1, +-1) / sqrt(2)``, whose rim speed is
``r * w / sqrt(2)`` (``scale``). The slip velocity is the contact point's velocity less the
rim's. Skid and differential wheels resist slip in every direction within one friction
circle (``|F| <= mu * load``); a mecanum wheel resists only along ``g``, plus a small roller
resistance across it. Rolling resistance ``crr * load`` opposes motion along ``g``.

Force shapes of the slip speed ``s`` (``vs`` the slip speed scale):

* coulomb: ``F = mu * load * sat(s / vs)``, ``sat`` the smooth sign of :func:`saturate`
  (76-78 % of ``mu * load`` at ``s = vs``, all of it from ``s = 3 vs``);
* magic formula (Pacejka, *Tire and Vehicle Dynamics*, 2012, §4.3.2, eq. 4.49):
  ``F = D sin(C atan(B k - E (B k - atan(B k))))`` with ``D = mu * load`` and the slip ratio
  ``k = s / max(|v|, |rim speed|, vs)``.

The same :func:`saturate` regularises every other dry-friction term of the simulator (rolling
and roller resistance, motor friction, wall friction): it is a division where ``tanh`` is an
exponential, and the physics sub-step calls it about five times per wheel.
"""

from __future__ import annotations

import math

from numba import njit


@njit(cache=True, error_model="numpy", forceinline=True)
def saturate(x: float) -> tuple[float, float]:
    """Smooth sign of ``x`` and its slope.

    ``sat(x) = x (27 + x^2) / (27 + 9 x^2)`` for ``|x| < 3`` and ``sign(x)`` beyond: a rational
    stand-in for ``tanh`` (common practice, no source) that reaches 1 with zero slope at
    ``|x| = 3``, so the curve is C1. Its slope ``(x^2 - 9)^2 / (9 (3 + x^2)^2)`` is 1 at 0 and
    never negative (monotone), and it stays within 0.024 of ``tanh`` (all checked in
    ``tests/sim/test_traction.py``).

    Returns
    -------
    value : float — in [-1, 1]
    slope : float — d value / dx, in [0, 1]
    """
    x2 = x * x
    if x2 >= 9.0:
        return (1.0 if x > 0.0 else -1.0), 0.0
    d = 1.0 / (3.0 + x2)
    q = (x2 - 9.0) * d
    return x * (27.0 + x2) * d / 9.0, q * q / 9.0


@njit(cache=True, error_model="numpy", forceinline=True)
def _magic(s, vnorm, b, c, e):
    # F / D and d(F / D) / ds of the magic formula at slip speed s (slip ratio k = s / vnorm)
    bk = b * s / vnorm
    phi = bk - e * (bk - math.atan(bk))
    ang = c * math.atan(phi)
    dphi = b * (1.0 - e + e / (1.0 + bk * bk))
    return math.sin(ang), math.cos(ang) * c / (1.0 + phi * phi) * dphi / vnorm


@njit(cache=True, error_model="numpy", forceinline=True)
def wheel_force(vcx, vcy, rim, gdx, gdy, gscale, mu, load, vs, crr, roller, model, b, c, e):
    """Floor force on one wheel (body frame) and its slip.

    Parameters
    ----------
    vcx, vcy : float — velocity of the contact point [m/s], body frame
    rim : float — wheel rim speed r * w [m/s]
    gdx, gdy, gscale : float — grip direction (unit, body frame) and the rim-speed factor
    mu, load : float — friction coefficient and normal load [N]
    vs : float — slip speed scale [m/s]
    crr, roller : float — rolling and mecanum roller resistance coefficients
    model : int — 0 coulomb, 1 magic formula; b, c, e its coefficients

    Returns
    -------
    fx, fy : float — force on the robot at this wheel [N], body frame
    f_grip : float — traction component along the grip direction [N]
    k_grip : float — -d f_grip / d slip, the slip stiffness [N s/m] (>= 0)
    slip : float — slip speed [m/s]
    """
    vg = vcx * gdx + vcy * gdy
    vp = -vcx * gdy + vcy * gdx
    sg = vg - rim * gscale
    fmax = mu * load
    mecanum = gscale < 0.999  # grip along g only, rollers free across it
    sp = 0.0 if mecanum else vp
    mag = abs(sg) if mecanum else math.sqrt(sg * sg + sp * sp)
    if model == 0:
        inv_vs = 1.0 / vs
        shape, slope = saturate(mag * inv_vs)
        slope *= inv_vs
    else:
        vnorm = max(abs(vg), abs(rim * gscale), vs)
        shape, slope = _magic(mag, vnorm, b, c, e)
    k = max(fmax * slope, 0.0)
    if mag > 1e-12:
        f = fmax * shape / mag
        fg = -f * sg
        fp = -f * sp
    else:
        fg = 0.0
        fp = 0.0
    if mecanum:
        fp = -roller * load * saturate(vp / vs)[0]
    fg_total = fg - crr * load * saturate(vg / vs)[0]
    fx = fg_total * gdx - fp * gdy
    fy = fg_total * gdy + fp * gdx
    return fx, fy, fg, k, mag
