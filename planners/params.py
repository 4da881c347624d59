"""Declared parameters: what a key means, its dimension, its default and its range.

Robot-side plug-ins (trackers, estimators) declare their ``[tracker]`` / ``[estimator]`` keys
as :class:`Param` objects; the scenario loader (:mod:`sim.scenario`) reads every table of a
scenario file against such declarations. Defaults therefore live in one place: here, beside
the key they belong to.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

#: marks a parameter without a default
REQUIRED: Any = type("Required", (), {"__repr__": lambda self: "REQUIRED"})()


@dataclass(frozen=True)
class Param:
    """One key of a file table.

    Parameters
    ----------
    dimension : str
        A unit dimension of :data:`sim.units.UNITS` (``"length"``, ``"angle"``, ...),
        ``"count"`` (an integer), ``"dimensionless"`` (a float), ``"choice"``, ``"bool"``,
        ``"text"`` or ``"tables"`` (an array of tables read against ``item``).
    default : object
        Value when the key is absent (in SI), ``None`` for "optional, no value", or
        :data:`REQUIRED`.
    doc : str
        One line for the reference in the README.
    gt, ge, lt, le : float, optional
        Bounds on the SI value (strict and non-strict).
    choices : tuple of str, optional
        Allowed strings for ``dimension="choice"``.
    shape : int, optional
        For vectors: the number of elements (``-1`` for any number >= 1).
    item : dict of str -> Param, optional
        Schema of each table for ``dimension="tables"``.
    """

    dimension: str
    default: Any = REQUIRED
    doc: str = ""
    gt: float | None = None
    ge: float | None = None
    lt: float | None = None
    le: float | None = None
    choices: tuple[str, ...] | None = None
    shape: int | None = None
    item: dict[str, "Param"] | None = None

    def allowed(self) -> str:
        """Human description of what the key accepts, for error messages."""
        if self.dimension == "choice":
            return "one of " + ", ".join(repr(c) for c in self.choices or ())
        bits = []
        if self.gt is not None:
            bits.append(f"> {self.gt:g}")
        if self.ge is not None:
            bits.append(f">= {self.ge:g}")
        if self.lt is not None:
            bits.append(f"< {self.lt:g}")
        if self.le is not None:
            bits.append(f"<= {self.le:g}")
        return " and ".join(bits)
