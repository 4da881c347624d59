"""Wheel-ground force from slip: regularised Coulomb and the Pacejka magic formula.

Each wheel has a grip direction ``g`` (body frame) along which it drives: the rolling
direction for skid and differential wheels; for a mecanum wheel with 45° rollers the
direction the rollers cannot roll, ``g = (1, +-1) / sqrt(2)``, whose rim speed is
``r * w / sqrt(2)`` (``scale``). The slip velocity is the contact point's velocity less the
rim's. Skid and differential wheels resist slip in every direction within one friction
circle (``|F| <= mu * load``); a mecanum wheel resists only along ``g``, plus a small roller
resistance across it. Rolling resistance ``crr * load`` opposes motion along ``g``.

Force shapes of the slip speed ``s`` (``vs`` the slip speed scale):

* coulomb: ``F = mu * load * tanh(s / vs)``;
* magic formula (Pacejka, *Tire and Vehicle Dynamics*, 2012, §4.3.2, eq. 4.49):
  ``F = D sin(C atan(B k - E (B k - atan(B k))))`` with ``D = mu * load`` and the slip ratio
  ``k = s / max(|v|, |rim speed|, vs)``.
"""

from __future__ import annotations

import math

from numba import njit


@njit(cache=True, inline="always")
def _shape(s, vnorm, vs, model, b, c, e):
    if model == 0:
        return math.tanh(s / vs)
    k = s / vnorm
    bk = b * k
    return math.sin(c * math.atan(bk - e * (bk - math.atan(bk))))


@njit(cache=True)
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
    vnorm = max(abs(vg), abs(rim * gscale), vs)
    fmax = mu * load
    if gscale < 0.999:  # mecanum: grip along g only, rollers free across it
        sp = 0.0
        mag = abs(sg)
        fg = -fmax * _shape(sg, vnorm, vs, model, b, c, e)
        fp = -roller * load * math.tanh(vp / vs)
    else:
        sp = vp
        mag = math.sqrt(sg * sg + sp * sp)
        if mag > 1e-12:
            f = fmax * _shape(mag, vnorm, vs, model, b, c, e)
            fg = -f * sg / mag
            fp = -f * sp / mag
        else:
            fg = 0.0
            fp = 0.0
    if model == 0:
        ch = math.cosh(min(mag / vs, 30.0))
        k = fmax / (vs * ch * ch)
    else:
        d = 1e-4 * vnorm
        up = _shape(mag + d, vnorm, vs, model, b, c, e)
        k = max(fmax * (up - _shape(mag - d, vnorm, vs, model, b, c, e)) / (2.0 * d), 0.0)
    f_grip = fg
    fg_total = fg - crr * load * math.tanh(vg / vs)
    fx = fg_total * gdx - fp * gdy
    fy = fg_total * gdy + fp * gdx
    return fx, fy, f_grip, k, math.sqrt(sg * sg + sp * sp)
