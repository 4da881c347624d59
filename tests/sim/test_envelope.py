"""skidpad envelope: slippery floors allow less speed, the grid and heat map axes, CLI and errors."""

from __future__ import annotations

import csv
import itertools
import re
from pathlib import Path

import numpy as np
import pytest

from planners.errors import SkidpadError
from sim.cli import SAFETY, main
from sim.envelope import MU_KEY, SPEED_KEY, EnvelopeOutcome, envelope, parse_steps, point_figures
from sim.param_eval import FIGURES, Job, JobResult, evaluate
from sim.param_space import Axis
from sim.search_plots import envelope_plot

ROOT = Path(__file__).resolve().parents[2]
HAIRPIN = ROOT / "scenarios" / "hairpin-mecanum.toml"
BEND = Path(__file__).resolve().parent / "data" / "bend-skid.toml"
SPEEDS = [0.5, 1.1666666666666667, 1.8333333333333335, 2.5]
MUS = [0.1, 0.5, 0.9]


@pytest.fixture(scope="module")
def grid(tmp_path_factory):
    """The bundled mecanum hairpin over speed scale 0.5..2.5 x friction 0.1..0.9, 3 runs a point."""
    out = tmp_path_factory.mktemp("env")
    o = envelope(HAIRPIN, runs=3, x=f"{SPEED_KEY}=0.5..2.5", y=f"{MU_KEY}=0.1..0.9", steps=(4, 3),
                 overrides=['run.vary.mass="5 %"'], csv_path=out / "envelope.csv")
    fig = envelope_plot(o.xs, o.ys, o.success, o.end_p95, o.within, x_label=o.x.label,
                        y_label=o.y.label, path=out / "envelope.png")
    return o, fig, out


def test_safe_speed_is_lower_on_the_slippery_floor_and_monotone_in_mu(grid):
    o, _, _ = grid
    fastest = o.fastest()
    assert [f.y for f in fastest] == pytest.approx(MUS)
    speeds = [-np.inf if f.x is None else f.x for f in fastest]
    # more grip never lowers the safe speed of a mecanum cart (grip bounds the wheels' force)
    assert all(a <= b for a, b in itertools.pairwise(speeds))
    assert speeds[0] < speeds[-1]
    # on mu 0.1 the fastest speeds lose the route: some runs fail to complete
    assert o.success[0, -1] < 0.95 or o.end_p95[0, -1] > o.tolerance
    assert o.max_cross_track == pytest.approx(0.45 / 2)  # half the 45 cm footprint width


def test_slow_and_grippy_is_accurate(grid):
    o, _, _ = grid
    assert o.completion[-1, 0] == 1.0 and o.success[-1, 0] == 1.0
    assert o.end_p95[-1, 0] < 0.01  # within 1 cm at half speed on a grippy floor


def test_csv_holds_the_grid_as_plain_numbers(grid):
    o, _, out = grid
    with open(out / "envelope.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 12
    got = sorted((float(r[SPEED_KEY]), float(r[MU_KEY])) for r in rows)
    np.testing.assert_allclose(got, sorted((x, y) for x in SPEEDS for y in MUS), rtol=1e-12)
    numeric = [k for k in rows[0] if k not in ("within", "error")]
    for r in rows:
        for k in numeric:  # every figure reads back with float() (no numpy reprs), or is empty
            assert r[k] == "" or np.isfinite(float(r[k])) or r[k] == "inf", (k, r[k])
        i = int(np.argmin(np.abs(np.array(MUS) - float(r[MU_KEY]))))
        j = int(np.argmin(np.abs(np.array(SPEEDS) - float(r[SPEED_KEY]))))
        assert float(r["completion_rate"]) == pytest.approx(o.completion[i, j], abs=1e-4)
        assert float(r["success_rate"]) == pytest.approx(o.success[i, j], abs=1e-4)
        assert float(r["end_position_error_p95_m"]) == o.end_p95[i, j]  # exact: repr round-trips
        assert (r["within"] == "true") == bool(o.within[i, j])
        assert int(r["runs"]) == 3 and 0 <= int(r["collided_runs"]) <= 3 and 0 <= int(r["off_path_runs"]) <= 3


def test_heat_map_axes_are_speed_scale_and_friction(grid):
    _, fig, out = grid
    ax = fig.axes[0]
    assert ax.get_xlabel() == "route.speed_scale" and ax.get_ylabel() == "robot.traction.mu"
    assert [t.get_text() for t in ax.get_xticklabels()] == ["0.5", "1.17", "1.83", "2.5"]
    assert [t.get_text() for t in ax.get_yticklabels()] == ["0.1", "0.5", "0.9"]
    assert ax.images[0].get_array().shape == (3, 4)  # rows = friction, columns = speed scale
    assert len(ax.texts) == 12
    from matplotlib.image import imread

    assert imread(out / "envelope.png").shape[2] in (3, 4)


def _result(status, **figures):
    n = len(status)
    base = {f: np.zeros(n) for f in FIGURES}
    base.update({k: np.asarray(v, dtype=float) for k, v in figures.items()})
    return JobResult(0, list(status), base, 10.0)


def test_point_figures_count_failed_runs_as_infinite_error():
    err = [0.01, 0.02, np.nan, 0.03]
    r = _result(["completed", "completed", "diverged", "timeout"], end_position_error_m=err)
    f = point_figures(r, 0.2)
    assert f.completion == 0.5 and f.success == 0.5 and f.end_p95 == np.inf
    ok = _result(["completed"] * 4, end_position_error_m=[0.01, 0.02, 0.03, 0.04])
    assert point_figures(ok, 0.2).end_p95 == pytest.approx(np.percentile([0.01, 0.02, 0.03, 0.04], 95))


def test_a_completed_run_that_collided_or_left_the_path_is_not_a_success():
    r = _result(["completed"] * 4, collisions=[0, 1, 0, 0], cross_track_max_m=[0.05, 0.05, 0.3, 0.2])
    f = point_figures(r, 0.25)
    assert (f.completion, f.collided, f.off_path, f.success) == (1.0, 1, 1, 0.5)
    assert point_figures(r, 0.35).success == 0.75  # a wider bound keeps the 0.3 m run


def test_a_real_run_that_hits_a_bench_and_still_completes_is_outside_the_envelope():
    """Mecanum hairpin at twice the speed on mu 0.2: it slides into the bench, goes on (run.collision
    = "continue") and completes, so completion alone would call the point safe."""
    r = evaluate(Job(0, str(HAIRPIN), (f"{SPEED_KEY}=2.0", f"{MU_KEY}=0.2"), (0,)))
    assert r.status == ["completed"] and r.figures["collisions"][0] >= 1
    assert r.figures["cross_track_max_m"][0] > 0.45 / 2
    f = point_figures(r, 0.45 / 2)
    assert f.completion == 1.0 and f.success == 0.0 and f.collided == 1 and f.off_path == 1


def _outcome(within_rows, xs=(0.5, 1.0, 1.5, 2.0)):
    within = np.array(within_rows, dtype=bool)
    ys = np.arange(within.shape[0], dtype=float)
    axis = Axis("k", 0.0, 1.0, "dimensionless", None)
    z = np.zeros(within.shape)
    return EnvelopeOutcome(axis, axis, np.array(xs), ys, z, z, z, within, 1, 0.05, 0.2)


def test_fastest_reads_each_row_monotonically_and_says_when_it_is_the_top_or_none():
    o = _outcome([[1, 1, 0, 1], [1, 1, 1, 1], [0, 1, 1, 1], [1, 1, 1, 0]])
    f = o.fastest()
    # a cell within the envelope above a failing one is not trusted
    assert (f[0].x, f[0].at_top, f[0].above) == (1.0, False, (2.0,))
    assert (f[1].x, f[1].at_top, f[1].above) == (2.0, True, ())
    assert (f[2].x, f[2].at_top, f[2].above) == (None, False, (1.0, 1.5, 2.0))
    assert (f[3].x, f[3].at_top, f[3].above) == (1.5, False, ())


def test_cli_writes_files_and_prints_fastest_per_friction(tmp_path, capsys):
    code = main(["envelope", str(BEND), "--speed", "0.5..1.0", "--mu", "0.6..0.9", "--runs", "2",
                 "--steps", "2x2", "--tolerance", "5cm", "--out", str(tmp_path), "--no-progress"])
    text = capsys.readouterr().out
    assert code == 0
    assert (tmp_path / "envelope.csv").exists() and (tmp_path / "envelope.png").exists()
    assert re.search(r"0\.9\s+\S+\s+(at least 1: widen --speed|0\.5|none \(even 0\.5 fails: lower --speed\))", text)
    assert " ".join(SAFETY.split()) in " ".join(text.split())


@pytest.mark.parametrize(
    "args, match",
    [
        (["--speed", "1.2..0.4"], r"--x: route.speed_scale range must be low..high with low < high, got '1.2..0.4'"),
        (["--mu", "0..1"], r"--y: robot.traction.mu must be > 0 and <= 3, got 0.0"),
        (["--speed", "0.5..1", "--x", "route.max_speed=0.5..1"], r"give --speed or --x for the x axis, not both"),
        (["--steps", "4"], r"--steps must be NXxNY with both >= 2 \(e.g. 5x4\), got '4'"),
        (["--x", "robot.traction.mu=0.5..1"], r"--x and --y must be different keys"),
        (["--max-cross-track", "0 cm"], r"--max-cross-track must be a length > 0, got '0 cm'"),
        (["--max-cross-track", "3 s"], r"--max-cross-track"),
    ],
)
def test_bad_options_are_one_line_with_exit_code_2(args, match, capsys):
    code = main(["envelope", str(BEND), "--runs", "2", *args])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and re.search(match, err[0])


def test_a_friction_axis_that_run_vary_overrides_is_refused():
    with pytest.raises(SkidpadError, match=r"run.vary.traction.mu draws it from \[0.6, 0.9\]"):
        envelope(ROOT / "scenarios" / "greenhouse-drift.toml", runs=2)


def test_steps_parse():
    assert parse_steps("5x4", where="f") == (5, 4)
    with pytest.raises(SkidpadError, match="got '1x4'"):
        parse_steps("1x4", where="f")


def test_a_process_pool_gives_the_same_grid_as_one_process():
    """Run k is bit-identical under any worker count, so the grid is too."""
    kw = {"runs": 2, "x": f"{SPEED_KEY}=0.6..1.2", "y": f"{MU_KEY}=0.4..0.9", "steps": (2, 2)}
    one, two = envelope(BEND, workers=1, **kw), envelope(BEND, workers=2, **kw)
    np.testing.assert_array_equal(one.completion, two.completion)
    np.testing.assert_array_equal(one.end_p95, two.end_p95)
