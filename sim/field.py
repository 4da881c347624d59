"""Field geometry: walls, obstacles, landmarks, floor patches; ray casts and clearance.

Geometry is held in shapely 2 objects for checks and drawing, and as plain arrays for the
compiled kernels (contact, range sensors): :attr:`Field.segments` lists every wall edge.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import shapely
from shapely.geometry import LineString, Point, Polygon

from planners.raycast import ray_cast_kernel

__all__ = ["Field", "Landmark", "Patch", "ray_cast_kernel"]


@dataclass(frozen=True)
class Landmark:
    """A marker the fix sensor can see. ``at``: x, y [m], field frame."""

    id: int
    at: tuple[float, float]


@dataclass(frozen=True)
class Patch:
    """A floor region whose friction differs: every robot's mu is multiplied by ``friction_scale``."""

    polygon: np.ndarray  # (K, 2)
    friction_scale: float


@dataclass(frozen=True, eq=False)
class Field:
    """A field: a walled polygon with obstacles, landmarks and floor patches.

    Attributes
    ----------
    name : str
    boundary : ndarray, shape (B, 2) — wall polygon vertices [m], field frame
    obstacles : tuple of ndarray, each shape (K, 2)
    landmarks : tuple of Landmark
    patches : tuple of Patch
    tile : float or None — grid spacing for drawing [m]
    friction_scale : float — multiplies every robot's mu on this floor
    source : str — the file it came from ("" when built in code)
    """

    name: str
    boundary: np.ndarray
    obstacles: tuple[np.ndarray, ...] = ()
    landmarks: tuple[Landmark, ...] = ()
    patches: tuple[Patch, ...] = ()
    tile: float | None = None
    friction_scale: float = 1.0
    source: str = ""
    extra: dict = field(default_factory=dict)

    @cached_property
    def outline(self) -> Polygon:
        """The boundary as a shapely polygon."""
        return Polygon(self.boundary)

    @cached_property
    def obstacle_shapes(self) -> list[Polygon]:
        """Obstacles as shapely polygons."""
        return [Polygon(o) for o in self.obstacles]

    @cached_property
    def free_space(self) -> Polygon:
        """Floor a robot's centre may occupy: the boundary less every obstacle."""
        space = self.outline
        for o in self.obstacle_shapes:
            space = space.difference(o)
        return space

    @cached_property
    def segments(self) -> np.ndarray:
        """Every wall edge, shape (S, 4): x0, y0, x1, y1 [m]. Boundary first, then obstacles."""
        rings = [self.boundary, *self.obstacles]
        segs = []
        for ring in rings:
            r = np.asarray(ring, dtype=np.float64)
            segs.append(np.hstack([r, np.roll(r, -1, axis=0)]))
        return np.ascontiguousarray(np.vstack(segs))

    @cached_property
    def landmark_xy(self) -> np.ndarray:
        """Landmark positions, shape (L, 2) [m]."""
        return np.array([lm.at for lm in self.landmarks], dtype=np.float64).reshape(-1, 2)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """min x, min y, max x, max y of the boundary [m]."""
        return tuple(float(v) for v in self.outline.bounds)  # type: ignore[return-value]

    def friction_at(self, xy: np.ndarray) -> np.ndarray:
        """Floor friction scale at points, shape (N,) for ``xy`` (N, 2)."""
        xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
        scale = np.full(xy.shape[0], self.friction_scale)
        for patch in self.patches:
            inside = shapely.contains_xy(Polygon(patch.polygon), xy[:, 0], xy[:, 1])
            scale = np.where(inside, self.friction_scale * patch.friction_scale, scale)
        return scale

    def blocked(self, shape: Polygon | Point | LineString) -> str | None:
        """Why ``shape`` does not fit on the floor (``None`` when it does)."""
        if not self.outline.contains(shape):
            return "outside the field boundary"
        for k, o in enumerate(self.obstacle_shapes):
            if o.intersects(shape):
                return f"inside obstacle {k + 1}"
        return None

    def ray_cast(
        self, origin: np.ndarray, direction: np.ndarray, max_range: float = np.inf
    ) -> np.ndarray:
        """Distance from each origin along its direction to the first wall or obstacle.

        Parameters
        ----------
        origin : ndarray, shape (N, 2) — ray start [m], field frame
        direction : ndarray, shape (N,) — ray angle [rad], field frame
        max_range : float — distances beyond this come back as ``inf``

        Returns
        -------
        ndarray, shape (N,) — distance [m]; ``inf`` when nothing is hit within range
        """
        origin = np.ascontiguousarray(origin, dtype=np.float64).reshape(-1, 2)
        direction = np.ascontiguousarray(direction, dtype=np.float64).reshape(-1)
        out = np.empty(origin.shape[0])
        ray_cast_kernel(self.segments, origin, direction, float(max_range), out)
        return out
