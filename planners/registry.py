"""Name -> class registries for trackers and estimators, with entry-point discovery.

Built-in plug-ins register themselves when their package is imported; third-party ones
register through the entry-point groups ``skidpad.trackers`` and ``skidpad.estimators``
(never by a path named in a file).
"""

from __future__ import annotations

from collections.abc import Callable
from importlib.metadata import entry_points
from typing import Generic, TypeVar

from planners.errors import RegistryError, did_you_mean

T = TypeVar("T")


class Registry(Generic[T]):
    """A registry of plug-in classes by name.

    Parameters
    ----------
    what : str — ``"tracker"`` or ``"estimator"``, used in messages
    group : str — the entry-point group searched on first lookup
    """

    def __init__(self, what: str, group: str) -> None:
        self.what = what
        self.group = group
        self._classes: dict[str, type[T]] = {}
        self._discovered = False

    def register(self, name: str) -> Callable[[type[T]], type[T]]:
        """Class decorator: register ``cls`` under ``name``."""

        def deco(cls: type[T]) -> type[T]:
            if name in self._classes and self._classes[name] is not cls:
                raise RegistryError(f"{self.what} {name!r} is registered twice")
            self._classes[name] = cls
            cls.name = name  # type: ignore[attr-defined]
            return cls

        return deco

    def _discover(self) -> None:
        if self._discovered:
            return
        self._discovered = True
        for ep in entry_points(group=self.group):
            if ep.name not in self._classes:
                self._classes[ep.name] = ep.load()

    def names(self) -> list[str]:
        """Sorted names of every registered plug-in (built-in and discovered)."""
        self._discover()
        return sorted(self._classes)

    def get(self, name: str) -> type[T]:
        """The class registered as ``name``.

        Raises
        ------
        RegistryError
            For an unknown name, with the closest known name suggested.
        """
        self._discover()
        try:
            return self._classes[name]
        except KeyError:
            known = ", ".join(sorted(self._classes))
            raise RegistryError(
                f"unknown {self.what} {name!r}; known: {known}"
                f"{did_you_mean(name, self._classes)}"
            ) from None
