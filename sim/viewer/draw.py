"""The one drawing interface of the viewer and the field-to-screen transform.

Layers draw in field coordinates (metres, y up) through a :class:`Canvas`; the canvas owns the
:class:`Transform` and is the only place that turns metres into pixels, so the same layer code
fills a window, an off-screen PNG snapshot or a benchmark surface. The panel, the timeline and
the help overlay use the screen-space methods (pixels, y down). In the spirit of pymunk's
debug-draw options object: a handful of primitives, no knowledge of what is drawn.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from sim.viewer import require_pygame
from sim.viewer.palette import Color

pygame = require_pygame()

Rect = tuple[int, int, int, int]  # left, top, width, height [px]

#: largest cached background (pixels) kept at field size; beyond it only the viewport is cached
_MAX_CACHE_PX = 4096 * 4096
_LIMIT = 1.0e6  # pixel coordinates are clamped here so extreme zoom cannot overflow SDL


@dataclass(frozen=True)
class Transform:
    """Field frame (x right, y up, metres) to screen (pixels, y down).

    ``screen_x = ox + scale * x`` and ``screen_y = oy - scale * y``: ``(ox, oy)`` is where the
    field origin lands. Pixel ``(i, j)`` covers ``[i, i + 1) x [j, j + 1)``.
    """

    scale: float  # px per m
    ox: float
    oy: float

    def to_screen(self, xy: np.ndarray) -> np.ndarray:
        """Field points (K, 2) [m] -> screen points (K, 2) [px, float]."""
        xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
        return np.column_stack([self.ox + self.scale * xy[:, 0], self.oy - self.scale * xy[:, 1]])

    def to_field(self, px: np.ndarray) -> np.ndarray:
        """Screen points (K, 2) [px] -> field points (K, 2) [m]."""
        px = np.asarray(px, dtype=np.float64).reshape(-1, 2)
        return np.column_stack([(px[:, 0] - self.ox) / self.scale, (self.oy - px[:, 1]) / self.scale])

    @classmethod
    def fit(cls, bounds: Sequence[float], rect: Rect, *, margin: int = 20) -> Transform:
        """The largest whole view of ``bounds`` (x0, y0, x1, y1) [m] centred in ``rect``.

        The offsets are whole pixels, so field corners land on pixel corners.
        """
        x0, y0, x1, y1 = (float(b) for b in bounds)
        left, top, w, h = rect
        span_x = max(x1 - x0, 1e-6)
        span_y = max(y1 - y0, 1e-6)
        scale = max(min((w - 2 * margin) / span_x, (h - 2 * margin) / span_y), 1e-3)
        ox = round(left + (w - scale * span_x) / 2.0 - scale * x0)
        oy = round(top + (h + scale * span_y) / 2.0 + scale * y0)
        return cls(scale=scale, ox=ox, oy=oy)

    def zoomed(self, factor: float, about: Sequence[float]) -> Transform:
        """Zoom by ``factor`` keeping the field point under screen point ``about`` fixed."""
        scale = float(np.clip(self.scale * factor, 2.0, 20000.0))
        f = scale / self.scale
        ax, ay = float(about[0]), float(about[1])
        return Transform(scale=scale, ox=ax + (self.ox - ax) * f, oy=ay + (self.oy - ay) * f)

    def panned(self, dx: float, dy: float) -> Transform:
        """Shift the picture by (dx, dy) pixels."""
        return Transform(scale=self.scale, ox=self.ox + dx, oy=self.oy + dy)

    def centred(self, xy: Sequence[float], rect: Rect) -> Transform:
        """Same zoom, field point ``xy`` [m] at the centre of ``rect`` (to the nearest pixel)."""
        cx = rect[0] + rect[2] / 2.0
        cy = rect[1] + rect[3] / 2.0
        return Transform(scale=self.scale, ox=round(cx - self.scale * xy[0]), oy=round(cy + self.scale * xy[1]))


def _ints(px: np.ndarray) -> list[list[int]]:
    return np.clip(np.rint(px), -_LIMIT, _LIMIT).astype(np.int64).tolist()


class Canvas:
    """Primitives on a pygame surface: field-space shapes, screen-space panels and text.

    Parameters
    ----------
    surface : pygame.Surface — drawn on in place (a window or an off-screen surface)
    transform : Transform — field to screen
    """

    def __init__(self, surface: pygame.Surface, transform: Transform) -> None:
        self.surface = surface
        self.transform = transform
        self._fonts: dict[tuple[int, bool], pygame.font.Font] = {}
        self._texts: dict[tuple[str, int, Color, bool], pygame.Surface] = {}
        self._cache: dict[object, tuple[pygame.Surface, Transform]] = {}
        if not pygame.font.get_init():
            pygame.font.init()

    @property
    def size(self) -> tuple[int, int]:
        """Surface width and height [px]."""
        return self.surface.get_size()

    def clip(self, rect: Rect | None) -> None:
        """Restrict drawing to ``rect`` (``None``: the whole surface)."""
        self.surface.set_clip(None if rect is None else pygame.Rect(rect))

    # ------------------------------------------------------------------ field space (metres)

    def polygon(
        self, points: np.ndarray, *, fill: Color | None = None, edge: Color | None = None, width: int = 1
    ) -> None:
        """A closed polygon, points (K, 2) [m], filled and/or outlined (``width`` px)."""
        pts = _ints(self.transform.to_screen(points))
        if len(pts) < 3:
            return
        if fill is not None:
            pygame.draw.polygon(self.surface, fill, pts)
        if edge is not None:
            pygame.draw.polygon(self.surface, edge, pts, max(1, width))

    def polyline(self, points: np.ndarray, color: Color, *, width: int = 1, closed: bool = False) -> None:
        """Connected line through points (K, 2) [m]; thick lines get round joints."""
        pts = _ints(self.transform.to_screen(points))
        if len(pts) < 2:
            return
        pygame.draw.lines(self.surface, color, closed, pts, width)
        if width > 3:
            for p in pts[1:-1] if not closed else pts:
                pygame.draw.circle(self.surface, color, p, width // 2)

    def segments(self, a: np.ndarray, b: np.ndarray, colors: np.ndarray | Color, *, width: int = 1) -> None:
        """Separate segments a[i] -> b[i], each (K, 2) [m]; ``colors`` one colour or (K, 3)."""
        pa = _ints(self.transform.to_screen(a))
        pb = _ints(self.transform.to_screen(b))
        single = not isinstance(colors, np.ndarray)
        for i, (p, q) in enumerate(zip(pa, pb)):
            c = colors if single else tuple(int(v) for v in colors[i])
            pygame.draw.line(self.surface, c, p, q, width)
            if width > 3:
                pygame.draw.circle(self.surface, c, q, width // 2)

    def dots(self, points: np.ndarray, radius: int, color: Color, *, edge: Color | None = None) -> None:
        """Round markers of ``radius`` px at points (K, 2) [m] (size independent of zoom)."""
        for p in _ints(self.transform.to_screen(points)):
            pygame.draw.circle(self.surface, color, p, radius)
            if edge is not None:
                pygame.draw.circle(self.surface, edge, p, radius, 1)

    def crosses(self, points: np.ndarray, size: int, color: Color, *, width: int = 2) -> None:
        """Diagonal crosses of half-size ``size`` px at points (K, 2) [m]."""
        for x, y in _ints(self.transform.to_screen(points)):
            pygame.draw.line(self.surface, color, (x - size, y - size), (x + size, y + size), width)
            pygame.draw.line(self.surface, color, (x - size, y + size), (x + size, y - size), width)

    def label(self, at: Sequence[float], text: str, color: Color, *, size: int, dx: int = 0, dy: int = 0) -> None:
        """Text beside a field point ``at`` [m], offset (dx, dy) px."""
        ((x, y),) = _ints(self.transform.to_screen(np.asarray(at)))
        self.text((x + dx, y + dy), text, color, size=size, anchor="center")

    def cached(self, key: object, bounds: Sequence[float], draw: Callable[[Canvas], None], fill: Color) -> None:
        """Draw static content once per zoom level and blit it afterwards.

        ``draw`` paints field-space content onto a canvas covering ``bounds`` (x0, y0, x1, y1)
        [m] plus a border; panning only moves the blit. At zooms where that surface would be
        huge, the cache covers the current view and is redrawn when the view moves.
        """
        tf = self.transform
        x0, y0, x1, y1 = bounds
        pad = 64
        w = int(np.ceil((x1 - x0) * tf.scale)) + 2 * pad
        h = int(np.ceil((y1 - y0) * tf.scale)) + 2 * pad
        if w * h <= _MAX_CACHE_PX:
            frac_x = tf.ox - np.floor(tf.ox)
            frac_y = tf.oy - np.floor(tf.oy)
            local = Transform(tf.scale, pad - tf.scale * x0 + frac_x, pad + tf.scale * y1 + frac_y)
            full_key = (key, tf.scale, frac_x, frac_y)
            at = (int(np.floor(tf.ox) - np.floor(local.ox)), int(np.floor(tf.oy) - np.floor(local.oy)))
        else:
            w, h = self.size
            local = tf
            full_key = (key, tf)
            at = (0, 0)
        hit = self._cache.get(full_key)
        if hit is None:
            if len(self._cache) > 6:
                self._cache.clear()
            surf = pygame.Surface((w, h))
            surf.fill(fill)
            sub = Canvas(surf, local)
            sub._fonts, sub._texts = self._fonts, self._texts
            draw(sub)
            hit = (surf, local)
            self._cache[full_key] = hit
        self.surface.fill(fill, self.surface.get_clip())
        self.surface.blit(hit[0], at)

    # ------------------------------------------------------------------ screen space (pixels)

    def rect(self, rect: Rect, *, fill: Color | None = None, edge: Color | None = None, width: int = 1) -> None:
        """A screen rectangle (left, top, width, height) [px]."""
        if fill is not None:
            self.surface.fill(fill, pygame.Rect(rect))
        if edge is not None:
            pygame.draw.rect(self.surface, edge, pygame.Rect(rect), width)

    def line_px(self, a: Sequence[float], b: Sequence[float], color: Color, *, width: int = 1) -> None:
        """A screen-space line [px]."""
        pygame.draw.line(self.surface, color, (int(a[0]), int(a[1])), (int(b[0]), int(b[1])), width)

    def font(self, size: int, bold: bool = False) -> pygame.font.Font:
        """The default font at ``size`` px (cached)."""
        f = self._fonts.get((size, bold))
        if f is None:
            f = pygame.font.Font(None, size)
            f.set_bold(bold)
            self._fonts[(size, bold)] = f
        return f

    def text_size(self, text: str, *, size: int, bold: bool = False) -> tuple[int, int]:
        """Width and height [px] of ``text`` when drawn."""
        return self.font(size, bold).size(text)

    def text(
        self, at: Sequence[int], text: str, color: Color, *, size: int, anchor: str = "topleft", bold: bool = False
    ) -> tuple[int, int]:
        """Draw ``text`` with its ``anchor`` ("topleft", "topright", "center", "midleft") at ``at``."""
        key = (text, size, color, bold)
        img = self._texts.get(key)
        if img is None:
            if len(self._texts) > 512:
                self._texts.clear()
            img = self.font(size, bold).render(text, True, color)
            self._texts[key] = img
        r = img.get_rect(**{anchor: (int(at[0]), int(at[1]))})
        self.surface.blit(img, r)
        return r.width, r.height
