"""Viewer drawing, headless (SDL_VIDEODRIVER=dummy): the transform, pixels of a known state,
replay equal to live, PNG snapshots."""

from __future__ import annotations

import os

os.environ.setdefault("SDL_VIDEODRIVER", "dummy")

import numpy as np
import pytest
from shapely import contains_xy
from shapely.geometry import Polygon

from sim.trace import Trace
from sim.viewer import palette as pal
from sim.viewer import snapshot
from sim.viewer.app import Viewer
from sim.viewer.draw import Transform
from sim.viewer.scene import body_to_field, outline
from sim.viewer.sources import LiveRun, Scene, scene_from_trace
from tests.sim.test_viewer_scene import StandInSimulation, aisle_plan, aisle_scenario

pygame = pytest.importorskip("pygame")


@pytest.fixture(scope="module")
def scenario():
    return aisle_scenario()


@pytest.fixture(scope="module")
def plan():
    return aisle_plan()


def _pixels(viewer: Viewer) -> np.ndarray:
    """(W, H, 3) copy of the surface (pygame's x-major order)."""
    return pygame.surfarray.array3d(viewer.canvas.surface)


def _is(px: np.ndarray, color) -> np.ndarray:
    return np.all(px == np.array(color, dtype=px.dtype), axis=-1)


def test_fit_maps_field_corners_to_whole_pixels():
    # 8 m x 5 m into 1000 x 600 px with a 20 px margin: scale = min(960 / 8, 560 / 5) = 112 px/m;
    # 896 px wide, centred: left edge at (1000 - 896) / 2 = 52; bottom edge at 20 + 560 = 580
    tf = Transform.fit((0.0, 0.0, 8.0, 5.0), (0, 0, 1000, 600), margin=20)
    assert tf.scale == 112.0
    np.testing.assert_array_equal(tf.to_screen(np.array([[0, 0], [8, 0], [8, 5], [0, 5]])),
                                  [[52, 580], [948, 580], [948, 20], [52, 20]])
    # y up on screen: a larger field y is a smaller row
    a, b = tf.to_screen(np.array([[1.0, 1.0], [1.0, 2.0]]))
    assert b[1] == a[1] - 112.0 and b[0] == a[0]
    np.testing.assert_allclose(tf.to_field(tf.to_screen(np.array([[1.3, 4.2]]))), [[1.3, 4.2]])
    # an offset rect shifts by its corner
    moved = Transform.fit((0.0, 0.0, 8.0, 5.0), (100, 50, 1000, 600), margin=20)
    np.testing.assert_array_equal(moved.to_screen(np.array([[0.0, 0.0]])), [[152, 630]])


def test_zoom_keeps_the_point_under_the_pointer():
    tf = Transform.fit((0.0, 0.0, 8.0, 5.0), (0, 0, 1000, 600))
    about = (321.0, 123.0)
    before = tf.to_field(np.array([about]))
    z = tf.zoomed(2.0, about)
    assert z.scale == 2.0 * tf.scale
    np.testing.assert_allclose(z.to_field(np.array([about])), before)
    np.testing.assert_allclose(z.panned(5, -7).to_screen(before), [[326.0, 116.0]])


def _replay(scenario, plan, runs=(0,)) -> Scene:
    sim = StandInSimulation(scenario, plan, runs=runs).run()
    return scene_from_trace(sim.trace(), scenario, plan, statuses=["completed"] * len(runs))


def test_truth_colour_fills_the_footprint_and_nothing_else(scenario, plan):
    viewer = Viewer(_replay(scenario, plan), size=(1280, 800), playing=False)
    k = 250
    viewer.seek(k)
    viewer.render()
    px = _pixels(viewer)
    left, top, w, h = viewer.field_rect
    pose = viewer.scene.chosen.data["pose"][k]
    screen = viewer.canvas.transform.to_screen(body_to_field(pose, outline(scenario.robot))[0])
    foot = Polygon(screen)
    cols, rows = np.meshgrid(np.arange(w) + left, np.arange(h) + top, indexing="ij")
    truth = _is(px[left:left + w, top:top + h], pal.TRUTH)
    centres_x, centres_y = cols[truth] + 0.5, rows[truth] + 0.5
    assert truth.sum() > 0.5 * foot.area  # most of the body shows (wheels, nose, outlines cover the rest)
    assert contains_xy(foot.buffer(1.5), centres_x, centres_y).all()  # and none of it outside
    # the field corners land on the wall colour, the floor inside is floor colour
    tf = viewer.canvas.transform
    for corner in tf.to_screen(np.array([[0, 0], [8, 0], [8, 5], [0, 5]])):
        x, y = np.rint(corner).astype(int)
        assert tuple(px[x, y]) == pal.WALL
    x, y = np.rint(tf.to_screen(np.array([[7.25, 4.75]]))[0]).astype(int)
    assert tuple(px[x, y]) == pal.FLOOR


def test_estimate_and_layers_toggle_their_pixels(scenario, plan):
    viewer = Viewer(_replay(scenario, plan), size=(1280, 800), playing=False)
    viewer.seek(250)
    viewer.render()
    left, top, w, h = viewer.field_rect
    field_px = lambda: _pixels(viewer)[left:left + w, top:top + h]
    assert _is(field_px(), pal.ESTIMATE).sum() > 100
    viewer.toggle_layer("estimate + ellipse")
    viewer.toggle_layer("trail")
    viewer.render()
    assert _is(field_px(), pal.ESTIMATE).sum() == 0
    viewer.toggle_layer("true footprint")
    viewer.render()
    assert _is(field_px(), pal.TRUTH).sum() == 0
    assert _is(field_px(), pal.OBSTACLE).sum() > 1000  # four pillars
    viewer.toggle_layer("field")
    viewer.render()
    assert _is(field_px(), pal.OBSTACLE).sum() == 0


def test_batch_draws_faint_copies_and_the_chosen_run(scenario, plan):
    viewer = Viewer(_replay(scenario, plan, runs=(0, 1, 2, 3)), size=(1280, 800), playing=False)
    viewer.seek(300)
    viewer.render()
    px = _pixels(viewer)
    assert _is(px, pal.FAINT).sum() > 50 and _is(px, pal.FAINT_TRAIL).sum() > 50
    viewer.scene.highlight = 3  # run 3 drives 9 cm left of run 0: the filled body moves up
    viewer.render()
    px3 = _pixels(viewer)
    rows0 = np.nonzero(_is(px, pal.TRUTH))[1]
    rows3 = np.nonzero(_is(px3, pal.TRUTH))[1]
    assert rows3.mean() == pytest.approx(rows0.mean() - 0.09 * viewer.canvas.transform.scale, abs=1.0)


def test_replay_of_a_saved_trace_draws_the_live_frame(tmp_path, scenario, plan):
    from sim.viewer.scene import path_from_plan

    live = LiveRun(lambda: StandInSimulation(scenario, plan))
    tracks = live.start()
    xy, speed = path_from_plan(plan)
    live_scene = Scene(scenario=scenario, tracks=tracks, dt=0.01, path=xy, path_speed=speed,
                       title=scenario.title, live=live)
    lv = Viewer(live_scene, size=(1100, 700), playing=True)
    for _ in range(30):  # 30 frames of 1/60 s at 5x: the live run records as the cursor moves
        lv.speed_index = 5
        lv.advance(1.0 / 60.0)
    k = lv.k
    assert 200 <= k < len(plan.t) and live.sim.recorder.k == k + 1
    lv.playing = False
    lv.render()
    live.sim.run()
    live.sim.trace().save(tmp_path / "trace.npz")
    rv = Viewer(scene_from_trace(Trace.load(tmp_path / "trace.npz"), scenario, plan), size=(1100, 700), playing=False)
    rv.seek(k)
    rv.render()
    left, top, w, h = lv.field_rect
    a = _pixels(lv)[left:left + w, top:top + h]
    b = _pixels(rv)[left:left + w, top:top + h]
    assert _is(a, pal.TRUTH).sum() > 100
    np.testing.assert_array_equal(a, b)


def test_snapshot_writes_the_last_frame(tmp_path, scenario, plan):
    sim = StandInSimulation(scenario, plan).run()
    out = snapshot(sim.trace(), scenario, plan, tmp_path / "shots" / "end.png", size=(960, 600))
    img = pygame.image.load(str(out))
    assert img.get_size() == (960, 600)
    px = pygame.surfarray.array3d(img)
    assert _is(px, pal.TRUTH).sum() > 100
    # the robot at its end (x = 6.0 m) is drawn right of the field's middle
    cols = np.nonzero(_is(px[:700], pal.TRUTH))[0]
    assert cols.mean() > 0.6 * 700
    # a simulation part-way through draws what it has recorded so far
    part = StandInSimulation(scenario, plan)
    for _ in range(100):
        part.step()
    out2 = snapshot(part, scenario, plan, tmp_path / "part.png", size=(960, 600))
    cols2 = np.nonzero(_is(pygame.surfarray.array3d(pygame.image.load(str(out2)))[:700], pal.TRUTH))[0]
    assert cols2.mean() < cols.mean() - 100
