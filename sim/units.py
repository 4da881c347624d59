"""Quantities with units: ``"18 in"``, ``"90 deg"``, ``"6000 rpm"`` -> SI floats.

Files may give a plain number (taken as SI) or a string ``"<number> <unit>"``. Each key of a
scenario expects one dimension; a unit of another dimension is an error that names the
expected one. :func:`to_si` is the only parser; :func:`format_quantity` shows SI values in
human units for output.
"""

from __future__ import annotations

import math
import re

from planners.errors import UnitError, did_you_mean

_IN = 0.0254
_FT = 0.3048
_LB = 0.45359237
_G = 9.80665
_OZF = 0.27801385  # ounce-force [N]
_LBF = 4.4482216152605

#: dimension -> {unit: factor to SI}
UNITS: dict[str, dict[str, float]] = {
    "length": {"m": 1.0, "cm": 0.01, "mm": 0.001, "in": _IN, "ft": _FT},
    "angle": {"rad": 1.0, "deg": math.pi / 180.0},
    "time": {"s": 1.0, "ms": 0.001},
    "frequency": {"Hz": 1.0, "hz": 1.0},
    "speed": {"m/s": 1.0, "in/s": _IN, "ft/s": _FT, "cm/s": 0.01, "mm/s": 0.001},
    "angular_speed": {"rad/s": 1.0, "deg/s": math.pi / 180.0, "rpm": 2.0 * math.pi / 60.0},
    "acceleration": {"m/s^2": 1.0, "in/s^2": _IN, "ft/s^2": _FT, "g": _G},
    "angular_acceleration": {"rad/s^2": 1.0, "deg/s^2": math.pi / 180.0},
    "jerk": {"m/s^3": 1.0, "in/s^3": _IN, "ft/s^3": _FT},
    "mass": {"kg": 1.0, "g": 0.001, "lb": _LB},
    "torque": {
        "N*m": 1.0,
        "N m": 1.0,
        "Nm": 1.0,
        "mN*m": 0.001,
        "mN m": 0.001,
        "oz*in": _OZF * _IN,
        "oz in": _OZF * _IN,
        "in*lb": _LBF * _IN,
        "in lb": _LBF * _IN,
    },
    "current": {"A": 1.0, "mA": 0.001},
    "voltage": {"V": 1.0, "mV": 0.001},
    "resistance": {"ohm": 1.0, "mohm": 0.001},
    "inertia": {"kg*m^2": 1.0, "kg m^2": 1.0, "g*cm^2": 1e-7},
    "force": {"N": 1.0, "lbf": _LBF},
    "percent": {"%": 0.01},
    # gyro white rate noise (angle random walk, IEEE Std 952-1997 coefficient N)
    "rate_noise_density": {
        "rad/s/sqrt(Hz)": 1.0,
        "rad/sqrt(s)": 1.0,
        "deg/s/sqrt(Hz)": math.pi / 180.0,
        "deg/h/sqrt(Hz)": math.pi / 180.0 / 3600.0,
        "deg/sqrt(h)": math.pi / 180.0 / 60.0,
    },
    # gyro bias random walk (rate random walk, IEEE Std 952-1997 coefficient K)
    "rate_random_walk": {
        "rad/s^2/sqrt(Hz)": 1.0,
        "rad/s/sqrt(s)": 1.0,
        "deg/s^2/sqrt(Hz)": math.pi / 180.0,
        "deg/s/sqrt(s)": math.pi / 180.0,
        "deg/h/sqrt(h)": math.pi / 180.0 / 3600.0 / 60.0,
    },
    "count": {},
    "dimensionless": {},
}

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_QUANTITY = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$")


def _unit_dimension(unit: str) -> str | None:
    for dim, table in UNITS.items():
        if unit in table:
            return dim
    return None


def to_si(value: object, dimension: str, *, where: str = "value") -> float:
    """Convert a number or a ``"<number> <unit>"`` string to SI.

    Parameters
    ----------
    value : int, float or str — a plain number is taken as SI
    dimension : str — a key of :data:`UNITS`, e.g. ``"length"``
    where : str — ``"<file>: <key>"`` used to start error messages

    Returns
    -------
    float — the value in SI units (``"percent"`` gives a fraction: ``"5 %"`` -> 0.05)

    Raises
    ------
    UnitError
        For a non-number, a non-finite number, an unknown unit or a unit of another
        dimension.

    Examples
    --------
    >>> round(to_si("18 in", "length"), 4)
    0.4572
    >>> to_si(2, "length")
    2.0
    """
    if isinstance(value, bool):
        raise UnitError(f"{where} must be a {_describe(dimension)}, got {value!r}")
    if isinstance(value, (int, float)):
        number = float(value)
        factor = 1.0
    elif isinstance(value, str):
        m = _QUANTITY.match(value)
        if not m:
            raise UnitError(f"{where} must be a {_describe(dimension)}, got {value!r}")
        number = float(m.group(1))
        unit = m.group(2)
        table = UNITS[dimension]
        if unit == "":
            factor = 1.0
        elif unit in table:
            factor = table[unit]
        else:
            other = _unit_dimension(unit)
            if other is not None:
                raise UnitError(
                    f"{where} must be a {_describe(dimension)}, got {value!r} (a {other})"
                )
            raise UnitError(
                f"{where} must be a {_describe(dimension)}, got {value!r} "
                f"(unknown unit {unit!r}){did_you_mean(unit, table)}"
            )
    else:
        raise UnitError(f"{where} must be a {_describe(dimension)}, got {value!r}")
    if not math.isfinite(number):
        raise UnitError(f"{where} must be a finite {_describe(dimension)}, got {value!r}")
    return number * factor


def _describe(dimension: str) -> str:
    units = ", ".join(UNITS[dimension])
    name = dimension.replace("_", " ")
    return f"{name} (number in SI or string with unit: {units})" if units else f"{name} number"


def format_quantity(value: float, dimension: str, unit: str, *, digits: int = 3) -> str:
    """Show an SI value in a chosen unit, e.g. ``format_quantity(0.0254, "length", "in")``."""
    return f"{value / UNITS[dimension][unit]:.{digits}g} {unit}"
