"""The error types of skidpad, in one module.

Every error is also a builtin (``ValueError`` and friends) so callers that do not know
skidpad can still catch it. Messages take one form::

    <file>: <key> must be <allowed>, got <value>[; did you mean <x>?]

The command line prints ``str(error)`` on one line and exits with code 2.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable


class SkidpadError(Exception):
    """Base class of every error skidpad raises on purpose."""


class ScenarioError(SkidpadError, ValueError):
    """A scenario, field, route or log file (or a ``--set`` override) is not acceptable."""


class UnitError(ScenarioError):
    """A quantity has the wrong unit, the wrong dimension or cannot be read."""


class RegistryError(SkidpadError, KeyError):
    """An unknown tracker or estimator name."""

    def __str__(self) -> str:  # KeyError would quote the message
        return str(self.args[0]) if self.args else ""


class PlanError(ScenarioError):
    """A route cannot be turned into a drivable plan."""


class LogError(ScenarioError):
    """A robot log file is malformed."""


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """Return ``"; did you mean X?"`` for the closest choice, or ``""`` when none is close.

    Examples
    --------
    >>> did_you_mean("mas", ["mass", "track"])
    '; did you mean mass?'
    """
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean {close[0]}?" if close else ""


def format_value(value: object) -> str:
    """Render a value for an error message: short, on one line."""
    text = repr(value)
    text = text.replace("\n", " ")
    return text if len(text) <= 60 else text[:57] + "..."
