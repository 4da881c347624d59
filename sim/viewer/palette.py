"""Colours of the viewer: a light concrete floor, dark walls, Okabe-Ito hues for the actors.

The Okabe-Ito set (Okabe & Ito, "Color Universal Design", 2002) keeps its eight hues apart for
the common colour-vision deficiencies; truth is its blue and the estimate its orange, the pair
that stays apart for every type. The floor is light and the lines thick so a projected image in
a lit room stays readable. Every colour is an opaque RGB triple: drawing never blends, so a
pixel test can find an actor by its exact colour.
"""

from __future__ import annotations

import numpy as np

Color = tuple[int, int, int]


def hex_rgb(code: str) -> Color:
    """``"#0072B2"`` -> ``(0, 114, 178)``."""
    code = code.lstrip("#")
    return int(code[0:2], 16), int(code[2:4], 16), int(code[4:6], 16)


def mix(a: Color, b: Color, w: float) -> Color:
    """``a`` moved a fraction ``w`` in [0, 1] towards ``b`` (an opaque stand-in for alpha)."""
    w = min(1.0, max(0.0, float(w)))
    return tuple(round(x + (y - x) * w) for x, y in zip(a, b))  # type: ignore[return-value]


# Okabe-Ito hues
BLACK = hex_rgb("#000000")
ORANGE = hex_rgb("#E69F00")
SKY = hex_rgb("#56B4E9")
GREEN = hex_rgb("#009E73")
YELLOW = hex_rgb("#F0E442")
BLUE = hex_rgb("#0072B2")
VERMILLION = hex_rgb("#D55E00")
PURPLE = hex_rgb("#CC79A7")

# the floor and its furniture
FLOOR = hex_rgb("#ECE8DF")
OUTSIDE = hex_rgb("#C9C4B8")
TILE_LINE = hex_rgb("#D8D2C4")
WALL = hex_rgb("#26292E")
OBSTACLE = hex_rgb("#5C6168")
PATCH = hex_rgb("#D3E4EC")
PATCH_EDGE = hex_rgb("#9DBCCB")
LANDMARK = hex_rgb("#26292E")
PATH_UNDER = hex_rgb("#3A3D42")

# actors
TRUTH = BLUE
TRUTH_EDGE = hex_rgb("#003A5C")
WHEEL = hex_rgb("#1B1B1B")
NOSE = hex_rgb("#FFFFFF")
TRAIL = hex_rgb("#4E8FC0")
ESTIMATE = ORANGE
REFERENCE = GREEN
TARGET = PURPLE
RAY = SKY
FIX = BLACK
FORCE = BLACK
SLIP = YELLOW
COLLISION = VERMILLION
FAINT = mix(TRUTH, FLOOR, 0.72)
FAINT_TRAIL = mix(TRAIL, FLOOR, 0.80)

# panel (a dark side bar: light text, large type)
PANEL = hex_rgb("#1F2226")
PANEL_RULE = hex_rgb("#3A3F46")
TEXT = hex_rgb("#F2F0EA")
TEXT_DIM = hex_rgb("#A3A8AF")
TEXT_ALERT = VERMILLION
TIMELINE = hex_rgb("#2E3237")
TIMELINE_FILL = hex_rgb("#6C7680")
OVERLAY = hex_rgb("#15171A")

#: the planned-speed ramp, slow -> fast: lightness falls steadily (yellow, purple, deep plum),
#: so the order reads in grey scale and for every colour-vision type
SPEED_RAMP = (YELLOW, PURPLE, hex_rgb("#4A2160"))


def ramp(u: np.ndarray, stops: tuple[Color, ...] = SPEED_RAMP) -> np.ndarray:
    """Colours along a piecewise-linear ramp.

    Parameters
    ----------
    u : ndarray, shape (K,) — position on the ramp in [0, 1] (clipped)
    stops : colours at evenly spaced positions

    Returns
    -------
    ndarray, shape (K, 3) — uint8 RGB
    """
    u = np.clip(np.asarray(u, dtype=np.float64).reshape(-1), 0.0, 1.0)
    xs = np.linspace(0.0, 1.0, len(stops))
    arr = np.array(stops, dtype=np.float64)
    out = np.column_stack([np.interp(u, xs, arr[:, c]) for c in range(3)])
    return np.rint(out).astype(np.uint8)
