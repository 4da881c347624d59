"""Speed of the viewer, headless: frames per second drawing one robot and a 200-run batch.

The batch case replays synthetic runs (no simulation cost) of the bundled scenario so the
figure is the drawing alone; the live case, when the runner is available, steps a real
simulation at 1x as the window would. ``skidpad bench`` reports these figures.
"""

from __future__ import annotations

import time

import numpy as np

from sim.scenario import Scenario, default_scenario_path, load_scenario
from sim.trace import CHANNELS, Trace, _shape


def synthetic_trace(scenario: Scenario, *, runs: int, seconds: float = 20.0, seed: int = 0) -> Trace:
    """Runs that drive the route's waypoints as straight legs at 1 m/s, each with its own drift.

    Only for measuring drawing speed: the motion is made up, not simulated.
    """
    rng = np.random.default_rng(seed)
    dt = 1.0 / scenario.run.rate
    ticks = round(seconds / dt)
    pts = np.array([scenario.route.start[:2], *[w.at for w in scenario.route.waypoints]])
    seg = np.hypot(*np.diff(pts, axis=0).T)
    s_knots = np.concatenate([[0.0], np.cumsum(seg)])
    s = np.minimum(np.arange(ticks) * dt * 1.0, s_knots[-1])
    x = np.interp(s, s_knots, pts[:, 0])
    y = np.interp(s, s_knots, pts[:, 1])
    heading = np.unwrap(np.arctan2(np.gradient(y), np.gradient(x) + 1e-12))
    w = scenario.robot.wheel_count
    data = {name: np.full((ticks, runs, *_shape(code, w)), np.nan) for name, (code, _) in CHANNELS.items()}
    drift = np.cumsum(rng.normal(0.0, 0.002, (ticks, runs)), axis=0)
    normal = np.column_stack([-np.sin(heading), np.cos(heading)])
    data["reference"][:] = np.column_stack([x, y, heading])[:, None, :]
    data["pose"][..., :2] = np.column_stack([x, y])[:, None, :] + drift[..., None] * normal[:, None, :]
    data["pose"][..., 2] = heading[:, None]
    data["estimate"][:] = data["pose"] + np.array([0.01, -0.01, 0.0])
    data["covariance"][:] = np.diag([1e-4, 1e-4, 1e-4])
    data["velocity"][:] = np.array([1.0, 0.0, 0.0])
    data["target"][:] = data["reference"][..., :2] + 0.3 * np.stack([np.cos(heading), np.sin(heading)], -1)[:, None]
    data["current"][:] = 3.0
    data["slip"][:] = 0.05
    data["battery"][:] = 12.4
    data["cross_track"][:] = drift
    data["fix"][::40] = data["pose"][::40]
    meta = {"scenario": scenario.title, "seed": seed, "dt": dt, "wheels": w, "end_tick": [ticks - 1] * runs}
    return Trace(t=np.arange(ticks) * dt, data=data, runs=np.arange(runs), meta=meta)


def _fps(viewer, wall_dt: float, seconds: float) -> float:
    viewer.playing = True
    frames = 0
    start = time.perf_counter()
    while time.perf_counter() - start < seconds:
        viewer.advance(wall_dt)
        viewer.render()
        frames += 1
        if not viewer.playing:
            viewer.pos, viewer.playing = 0.0, True
    return frames / (time.perf_counter() - start)


def bench_viewer(*, seconds: float = 2.0, size: tuple[int, int] = (1280, 800), batch: int = 200) -> dict:
    """Frames per second of the viewer drawn off-screen.

    Parameters
    ----------
    seconds : wall time per case [s]
    size : picture width, height [px]
    batch : runs in the batch-replay case

    Returns
    -------
    dict — ``viewer_replay_1_fps`` (one robot, all layers), ``viewer_batch_<batch>_fps``
    (faint copies plus the chosen run), ``viewer_batch_<batch>_follow_fps`` (the same, zoomed
    in and following the chosen robot), ``viewer_live_1_fps`` (a real simulation stepped at
    1x; None when the runner cannot be imported), ``viewer_size``
    """
    from sim.viewer.app import Viewer
    from sim.viewer.sources import scene_from_trace

    sc = load_scenario(default_scenario_path())
    out: dict = {"viewer_size": f"{size[0]}x{size[1]}"}
    one = scene_from_trace(synthetic_trace(sc, runs=1), sc)
    out["viewer_replay_1_fps"] = _fps(Viewer(one, size=size), 1.0 / 60.0, seconds)
    many = scene_from_trace(synthetic_trace(sc, runs=batch), sc)
    out[f"viewer_batch_{batch}_fps"] = _fps(Viewer(many, size=size), 1.0 / 30.0, seconds)
    follow = Viewer(many, size=size)
    follow.zoom(2.0)
    follow.toggle_follow()
    out[f"viewer_batch_{batch}_follow_fps"] = _fps(follow, 1.0 / 30.0, seconds)
    try:
        from sim.viewer.sources import live_scene

        live = live_scene(sc)
    except ImportError as exc:
        out["viewer_live_1_fps"] = None
        out["viewer_live_note"] = f"runner not importable: {exc}"
    else:
        out["viewer_live_1_fps"] = _fps(Viewer(live, size=size), 1.0 / 60.0, seconds)
    return out
