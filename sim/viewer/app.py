"""The viewer's state, controls and event loop.

:class:`Viewer` holds what is shown (tick cursor, playback speed, layers, zoom) and reacts to
pygame events; it draws onto any surface, so the window, the PNG snapshot and the benchmark
share it. Every key is declared once in :data:`CONTROLS` or :data:`sim.viewer.layers.LAYERS`;
the help overlay lists exactly those.
"""

from __future__ import annotations

import re
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from sim.viewer import require_pygame
from sim.viewer.draw import Canvas, Rect, Transform
from sim.viewer.layers import LAYERS, draw_scene
from sim.viewer.panel import draw_help, draw_panel, draw_scale_bar, draw_timeline, timeline_tick
from sim.viewer.scene import Scene

pygame = require_pygame()

#: playback speeds, slowest first [x real time]
SPEEDS = (0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0)
ZOOM_STEP = 1.25


@dataclass(frozen=True)
class Control:
    """A control: its pygame key codes, how the help names them, what it does, the method."""

    keys: tuple[int, ...]
    label: str
    does: str
    action: str


CONTROLS: tuple[Control, ...] = (
    Control((pygame.K_SPACE,), "space", "pause / resume", "toggle_pause"),
    Control((pygame.K_RIGHT,), "right", "one tick forward (pauses)", "step_forward"),
    Control((pygame.K_LEFT,), "left", "one tick back (pauses)", "step_back"),
    Control((pygame.K_UP,), "up", "play faster (up to 50x)", "faster"),
    Control((pygame.K_DOWN,), "down", "play slower (down to 0.1x)", "slower"),
    Control((pygame.K_EQUALS, pygame.K_PLUS, pygame.K_KP_PLUS), "= / +", "zoom in", "zoom_in"),
    Control((pygame.K_MINUS, pygame.K_KP_MINUS), "-", "zoom out", "zoom_out"),
    Control((pygame.K_f,), "f", "follow the robot", "toggle_follow"),
    Control((pygame.K_c,), "c", "fit the field to the window", "fit"),
    Control((pygame.K_r,), "r", "restart", "restart"),
    Control((pygame.K_w,), "w", "jump to the worst cross-track moment", "worst"),
    Control((pygame.K_RIGHTBRACKET,), "]", "highlight the next run", "next_run"),
    Control((pygame.K_LEFTBRACKET,), "[", "highlight the previous run", "previous_run"),
    Control((pygame.K_s,), "s", "save a PNG screenshot", "screenshot"),
    Control((pygame.K_h, pygame.K_SLASH), "h", "show / hide this help", "toggle_help"),
    Control((pygame.K_q, pygame.K_ESCAPE), "q / esc", "quit", "quit"),
)
#: mouse controls, listed in the help (no keys)
MOUSE = (("wheel", "zoom at the pointer"), ("drag", "pan"), ("click bar", "seek in time"))


class Viewer:
    """What is on screen and how input changes it.

    Parameters
    ----------
    scene : Scene
    surface : pygame.Surface, optional — draw here (default: an off-screen surface of ``size``)
    size : (int, int) — off-screen size [px] when no surface is given
    units : "m" or "in" — lengths in the panel
    shots : folder for screenshots
    playing, speed : start playing or paused, at this speed (the nearest of :data:`SPEEDS`)

    Each control of :data:`CONTROLS` names a method here that takes no argument; tests and
    the event loop call the same methods.
    """

    def __init__(
        self, scene: Scene, *, surface: pygame.Surface | None = None, size: tuple[int, int] = (1280, 800),
        units: str = "m", shots: str | Path = ".", playing: bool = True, speed: float = 1.0,
    ) -> None:
        self.scene = scene
        self.units = units
        self.canvas = Canvas(surface if surface is not None else pygame.Surface(size), Transform(1.0, 0.0, 0.0))
        self.pos = 0.0
        self.playing = playing
        self.speed_index = int(np.argmin([abs(s - speed) for s in SPEEDS]))
        self.follow = False
        self.on = frozenset(layer.name for layer in LAYERS)
        self.help = False
        self.running = True
        self.auto_fit = True
        self.shots = Path(shots)
        self.last_shot: Path | None = None
        self._drag = False
        self._scrub = False
        self._keys = {key: c.action for c in CONTROLS for key in c.keys}
        self._keys.update({ord(layer.key): f"layer:{layer.name}" for layer in LAYERS})
        self.layout()

    # ------------------------------------------------------------------ geometry

    @property
    def k(self) -> int:
        """Tick shown now."""
        return int(self.pos)

    @property
    def speed(self) -> float:
        """Playback speed [x real time]."""
        return SPEEDS[self.speed_index]

    def layout(self) -> None:
        """Split the surface into field view, timeline and side panel; refit when auto-fitting."""
        w, h = self.canvas.size
        panel = int(min(max(0.25 * w, 240), 380, 0.5 * w))
        bar = max(28, h // 22)
        self.field_rect: Rect = (0, 0, w - panel, h - bar)
        self.timeline_rect: Rect = (0, h - bar, w - panel, bar)
        self.panel_rect: Rect = (w - panel, 0, panel, h)
        if self.auto_fit:
            self.canvas.transform = Transform.fit(self.scene.scenario.field.bounds, self.field_rect)

    def set_surface(self, surface: pygame.Surface) -> None:
        """Draw on a new surface (the window was resized)."""
        self.canvas.surface = surface
        self.layout()

    # ------------------------------------------------------------------ actions

    def seek(self, k: int) -> None:
        """Show tick ``k`` (clipped to what is recorded)."""
        self.pos = float(min(max(k, 0), max(self.scene.ticks() - 1, 0)))

    def toggle_pause(self) -> None:
        if not self.playing and self.scene.live is None and self.k >= self.scene.ticks() - 1:
            self.pos = 0.0  # resuming at the end of a replay starts it again
        self.playing = not self.playing

    def step_forward(self) -> None:
        self.playing = False
        if self.scene.live is not None:
            self.scene.live.advance(self.scene.tracks, self.k + 2)
        self.seek(self.k + 1)

    def step_back(self) -> None:
        self.playing = False
        self.seek(self.k - 1)

    def faster(self) -> None:
        self.speed_index = min(self.speed_index + 1, len(SPEEDS) - 1)

    def slower(self) -> None:
        self.speed_index = max(self.speed_index - 1, 0)

    def zoom(self, factor: float, about: tuple[float, float] | None = None) -> None:
        """Zoom by ``factor`` about a screen point (default: the centre of the field view)."""
        r = self.field_rect
        about = about or (r[0] + r[2] / 2.0, r[1] + r[3] / 2.0)
        self.canvas.transform = self.canvas.transform.zoomed(factor, about)
        self.auto_fit = False

    def zoom_in(self) -> None:
        self.zoom(ZOOM_STEP)

    def zoom_out(self) -> None:
        self.zoom(1.0 / ZOOM_STEP)

    def toggle_follow(self) -> None:
        self.follow = not self.follow
        if self.follow:
            self.auto_fit = False

    def fit(self) -> None:
        self.auto_fit = True
        self.follow = False
        self.layout()

    def restart(self) -> None:
        live = self.scene.live
        if live is not None:
            self.scene.tracks = live.start()
            live.advance(self.scene.tracks, 1)
        self.pos = 0.0

    def worst(self) -> None:
        k = self.scene.chosen.worst_tick()
        if k is not None:
            self.playing = False
            self.seek(k)

    def next_run(self) -> None:
        self.scene.highlight = (self.scene.highlight + 1) % len(self.scene.tracks)

    def previous_run(self) -> None:
        self.scene.highlight = (self.scene.highlight - 1) % len(self.scene.tracks)

    def screenshot(self) -> Path:
        """Save what is on screen as PNG in the screenshot folder; returns the file."""
        self.render()
        slug = re.sub(r"[^a-z0-9]+", "-", self.scene.title.lower()).strip("-") or "skidpad"
        base = f"{slug}-run{self.scene.chosen.run}-t{self.scene.time(self.k):07.2f}s"
        self.shots.mkdir(parents=True, exist_ok=True)
        path = self.shots / f"{base}.png"
        n = 1
        while path.exists():
            path = self.shots / f"{base}-{n}.png"
            n += 1
        pygame.image.save(self.canvas.surface, str(path))
        self.last_shot = path
        return path

    def toggle_help(self) -> None:
        self.help = not self.help

    def quit(self) -> None:
        self.running = False

    def toggle_layer(self, name: str) -> None:
        self.on = self.on ^ {name}

    # ------------------------------------------------------------------ events and time

    def handle(self, event: pygame.event.Event) -> None:
        """React to one pygame event."""
        if event.type == pygame.QUIT:
            self.quit()
        elif event.type == pygame.KEYDOWN:
            action = self._keys.get(event.key)
            if action and action.startswith("layer:"):
                self.toggle_layer(action[6:])
            elif action:
                getattr(self, action)()
        elif event.type == pygame.MOUSEWHEEL:
            self.zoom(ZOOM_STEP ** float(event.y), pygame.mouse.get_pos())
        elif event.type == pygame.MOUSEBUTTONDOWN and event.button == 1:
            if pygame.Rect(self.timeline_rect).collidepoint(event.pos):
                self._scrub = True
                self.seek(timeline_tick(self.timeline_rect, self.scene, event.pos[0]))
            elif pygame.Rect(self.field_rect).collidepoint(event.pos):
                self._drag = True
        elif event.type == pygame.MOUSEBUTTONUP and event.button == 1:
            self._drag = self._scrub = False
        elif event.type == pygame.MOUSEMOTION:
            if self._drag:
                self.canvas.transform = self.canvas.transform.panned(*event.rel)
                self.auto_fit = self.follow = False
            elif self._scrub:
                self.seek(timeline_tick(self.timeline_rect, self.scene, event.pos[0]))

    def advance(self, wall_dt: float) -> None:
        """Move the cursor by ``wall_dt`` seconds of wall time at the playback speed."""
        scene = self.scene
        if self.playing:
            self.pos += wall_dt * self.speed / scene.dt
            if scene.live is not None:
                scene.live.advance(scene.tracks, self.k + 1)
            last = scene.ticks() - 1
            if self.pos >= last:
                self.pos = float(max(last, 0))
                if scene.live is None or scene.live.finished:
                    self.playing = False
        if self.follow:
            tr = scene.chosen
            pose = tr.data["pose"][tr.at(self.k)]
            if np.isfinite(pose).all():
                self.canvas.transform = self.canvas.transform.centred(pose[:2], self.field_rect)

    def render(self) -> None:
        """Draw the whole picture for the current tick."""
        c = self.canvas
        c.clip(self.field_rect)
        draw_scene(c, self.scene, self.k, self.on)
        fr = self.field_rect
        draw_scale_bar(c, (fr[0] + 16, fr[1] + fr[3] - 14), units=self.units)
        c.clip(None)
        draw_timeline(c, self.timeline_rect, self.scene, self.k, self.scene.chosen.worst_tick())
        draw_panel(c, self.panel_rect, self.scene, self.k, units=self.units, playing=self.playing,
                   speed=self.speed, follow=self.follow, on=self.on)
        if self.help:
            controls = [(c_.label, c_.does) for c_ in CONTROLS] + list(MOUSE)
            layers = [(ly.key, ly.name, ly.name in self.on) for ly in sorted(LAYERS, key=lambda x: (x.key == "0", x.key))]
            draw_help(c, fr, controls, layers)

    def frame(self, wall_dt: float) -> None:
        """One pass of the loop: pending events, time, drawing."""
        for event in pygame.event.get():
            if event.type in (pygame.VIDEORESIZE, pygame.WINDOWSIZECHANGED):
                surface = pygame.display.get_surface()
                if surface is not None:
                    self.set_surface(surface)
            self.handle(event)
        self.advance(wall_dt)
        self.render()


def run_window(scene: Scene, *, size: tuple[int, int] = (1280, 800), units: str = "m", shots: str | Path = ".",
               speed: float = 1.0, fps: int = 60) -> None:
    """Open a resizable window and run the viewer until it is closed."""
    from sim.viewer import ViewerError, no_display_message

    try:
        pygame.display.init()
        surface = pygame.display.set_mode(size, pygame.RESIZABLE)
    except pygame.error as exc:
        pygame.quit()
        raise ViewerError(no_display_message(str(exc) or "SDL could not open a window")) from None
    pygame.font.init()
    try:
        pygame.display.set_caption(f"skidpad - {scene.title}")
        viewer = Viewer(scene, surface=surface, units=units, shots=shots, speed=speed)
        clock = pygame.time.Clock()
        last = time.perf_counter()
        while viewer.running:
            clock.tick(fps)
            now = time.perf_counter()
            viewer.frame(min(now - last, 0.1))
            last = now
            pygame.display.flip()
    finally:
        pygame.quit()
