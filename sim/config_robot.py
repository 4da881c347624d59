"""The ``[robot]`` table of a scenario: chassis, motors, battery and traction, in SI.

Each field's metadata holds the :class:`~planners.params.Param` that the loader
(:mod:`sim.scenario`) checks the file against; defaults live here and nowhere else.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from planners.params import REQUIRED, Param


def _p(dimension: str, default: object = REQUIRED, doc: str = "", **kw) -> dict:
    return {"param": Param(dimension=dimension, default=default, doc=doc, **kw)}


@dataclass(frozen=True)
class Motor:
    """One drive motor, from its datasheet (values at the motor shaft, before the gearbox)."""

    free_speed: float = field(metadata=_p("angular_speed", gt=0.0, doc="no-load speed at nominal voltage"))
    stall_torque: float = field(metadata=_p("torque", gt=0.0, doc="torque at zero speed"))
    stall_current: float = field(metadata=_p("current", gt=0.0, doc="current at zero speed"))
    free_current: float = field(metadata=_p("current", ge=0.0, doc="current at no load"))
    nominal_voltage: float | None = field(
        default=None,
        metadata=_p("voltage", None, "voltage of the datasheet figures (default battery.voltage)", gt=0.0),
    )
    current_limit: float | None = field(
        default=None, metadata=_p("current", None, "per-motor current limit (optional)", gt=0.0)
    )
    rotor_inertia: float = field(
        default=0.0, metadata=_p("inertia", 0.0, "rotor moment of inertia", ge=0.0)
    )


@dataclass(frozen=True)
class Battery:
    """The battery: open-circuit voltage and internal resistance (sags under load)."""

    voltage: float = field(metadata=_p("voltage", gt=0.0, doc="open-circuit voltage"))
    resistance: float = field(
        default=0.0, metadata=_p("resistance", 0.0, "internal resistance", ge=0.0)
    )


@dataclass(frozen=True)
class Traction:
    """Wheel-ground force model.

    ``coulomb``: force = mu * load * sat(slip speed / slip_speed) along each resisting
    direction. ``magic-formula``: Pacejka's D sin(C atan(B k - E (B k - atan(B k)))) on the
    slip ratio k, with D = mu * load.
    """

    model: str = field(
        default="coulomb",
        metadata=_p("choice", "coulomb", "force model", choices=("coulomb", "magic-formula")),
    )
    mu: float = field(default=0.9, metadata=_p("dimensionless", 0.9, "friction coefficient", gt=0.0, le=3.0))
    slip_speed: float = field(
        default=0.05, metadata=_p("speed", 0.05, "coulomb: slip speed where force reaches 78% of mu*load (all of it at 3x)", gt=0.0)
    )
    b: float = field(default=10.0, metadata=_p("dimensionless", 10.0, "magic formula stiffness B", gt=0.0))
    c: float = field(default=1.9, metadata=_p("dimensionless", 1.9, "magic formula shape C", gt=0.0, lt=2.0))
    e: float = field(default=0.97, metadata=_p("dimensionless", 0.97, "magic formula curvature E", le=1.0))
    rolling_resistance: float = field(
        default=0.01, metadata=_p("dimensionless", 0.01, "rolling resistance coefficient", ge=0.0, lt=1.0)
    )
    roller_friction: float = field(
        default=0.02,
        metadata=_p("dimensionless", 0.02, "mecanum: resistance along the free roller direction", ge=0.0, lt=1.0),
    )
    load_transfer: bool = field(
        default=False, metadata=_p("bool", False, "shift normal loads under acceleration")
    )
    cg_height: float = field(
        default=0.05, metadata=_p("length", 0.05, "height of the centre of gravity", ge=0.0)
    )


@dataclass(frozen=True)
class Robot:
    """The chassis and its drive.

    Wheel order: mecanum front-left, front-right, rear-left, rear-right; skid and differential
    left wheels (front to rear) then right wheels. ``gear_ratio`` is motor turns per wheel turn.
    """

    chassis: str = field(
        metadata=_p("choice", doc="wheel layout", choices=("mecanum", "skid", "differential"))
    )
    mass: float = field(metadata=_p("mass", gt=0.0, doc="total mass"))
    footprint: tuple[float, float] = field(
        metadata=_p("length", shape=2, doc="length, width of the outline", gt=0.0)
    )
    wheel_radius: float = field(metadata=_p("length", gt=0.0, doc="drive wheel radius"))
    track: float = field(metadata=_p("length", gt=0.0, doc="distance between left and right wheels"))
    gear_ratio: float = field(metadata=_p("dimensionless", gt=0.0, doc="motor turns per wheel turn"))
    motor: Motor = field(metadata=_p("table", doc="drive motor"))
    battery: Battery = field(metadata=_p("table", doc="battery"))
    wheelbase: float = field(
        default=0.0,
        metadata=_p("length", 0.0, "distance between front and rear wheels (mecanum, skid)", ge=0.0),
    )
    wheels: int | None = field(
        default=None, metadata=_p("count", None, "wheel count (skid: 4 or 6; default by chassis)")
    )
    inertia: float | None = field(
        default=None,
        metadata=_p("inertia", None, "yaw moment of inertia (default: uniform box)", gt=0.0),
    )
    cg: tuple[float, float] = field(
        default=(0.0, 0.0), metadata=_p("length", (0.0, 0.0), "centre of gravity offset", shape=2)
    )
    gear_efficiency: float = field(
        default=0.9, metadata=_p("dimensionless", 0.9, "gearbox efficiency", gt=0.0, le=1.0)
    )
    wheel_inertia: float = field(
        default=5e-4, metadata=_p("inertia", 5e-4, "one wheel's moment of inertia", ge=0.0)
    )
    idle: str = field(
        default="brake",
        metadata=_p("choice", "brake", "motor behaviour at zero duty", choices=("brake", "coast")),
    )
    traction: Traction = field(default_factory=Traction, metadata=_p("table", None, "wheel-ground model"))

    @property
    def wheel_count(self) -> int:
        """Number of drive wheels (W)."""
        if self.wheels is not None:
            return self.wheels
        return {"mecanum": 4, "skid": 4, "differential": 2}[self.chassis]

    @property
    def yaw_inertia(self) -> float:
        """Yaw inertia [kg m^2]: ``inertia`` or a uniform box m (L^2 + W^2) / 12."""
        if self.inertia is not None:
            return self.inertia
        length, width = self.footprint
        return self.mass * (length**2 + width**2) / 12.0
