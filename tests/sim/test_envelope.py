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
from sim.envelope import MU_KEY, SPEED_KEY, envelope, parse_steps, point_figures
from sim.param_eval import FIGURES, JobResult
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
    fig = envelope_plot(o.xs, o.ys, o.completion, o.end_p95, o.within, x_label=o.x.label,
                        y_label=o.y.label, path=out / "envelope.png")
    return o, fig, out


def test_safe_speed_is_lower_on_the_slippery_floor_and_monotone_in_mu(grid):
    o, _, _ = grid
    fastest = o.fastest()
    assert [y for y, _ in fastest] == pytest.approx(MUS)
    speeds = [-np.inf if x is None else x for _, x in fastest]
    # more grip never lowers the safe speed of a mecanum cart (grip bounds the wheels' force)
    assert all(a <= b for a, b in itertools.pairwise(speeds))
    assert speeds[0] < speeds[-1]
    # on mu 0.1 the fastest speeds lose the route: some runs fail to complete
    assert o.completion[0, -1] < 0.95 or o.end_p95[0, -1] > o.tolerance


def test_slow_and_grippy_is_accurate(grid):
    o, _, _ = grid
    assert o.completion[-1, 0] == 1.0
    assert o.end_p95[-1, 0] < 0.01  # within 1 cm at half speed on a grippy floor


def test_csv_holds_the_grid(grid):
    o, _, out = grid
    with open(out / "envelope.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 12
    got = sorted((float(r[SPEED_KEY]), float(r[MU_KEY])) for r in rows)
    np.testing.assert_allclose(got, sorted((x, y) for x in SPEEDS for y in MUS), rtol=1e-12)
    for r in rows:
        i = int(np.argmin(np.abs(np.array(MUS) - float(r[MU_KEY]))))
        j = int(np.argmin(np.abs(np.array(SPEEDS) - float(r[SPEED_KEY]))))
        assert float(r["completion_rate"]) == pytest.approx(o.completion[i, j], abs=1e-4)
        assert (r["within"] == "true") == bool(o.within[i, j])
        assert int(r["runs"]) == 3


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


def test_point_figures_count_failed_runs_as_infinite_error():
    fig = np.array([0.01, 0.02, np.nan, 0.03])
    r = JobResult(0, ["completed", "completed", "diverged", "timeout"], {f: fig for f in FIGURES}, 10.0)
    completion, p95 = point_figures(r)
    assert completion == 0.5 and p95 == np.inf
    ok = JobResult(0, ["completed"] * 4, {f: np.array([0.01, 0.02, 0.03, 0.04]) for f in FIGURES}, 10.0)
    assert point_figures(ok)[1] == pytest.approx(np.percentile([0.01, 0.02, 0.03, 0.04], 95))


def test_cli_writes_files_and_prints_fastest_per_friction(tmp_path, capsys):
    code = main(["envelope", str(BEND), "--speed", "0.5..1.0", "--mu", "0.6..0.9", "--runs", "2",
                 "--steps", "2x2", "--tolerance", "5cm", "--out", str(tmp_path), "--no-progress"])
    text = capsys.readouterr().out
    assert code == 0
    assert (tmp_path / "envelope.csv").exists() and (tmp_path / "envelope.png").exists()
    assert re.search(r"0\.9\s+\S+\s+(1|0\.5|none)", text)
    assert " ".join(SAFETY.split()) in " ".join(text.split())


@pytest.mark.parametrize(
    "args, match",
    [
        (["--speed", "1.2..0.4"], r"--x: route.speed_scale range must be low..high with low < high, got '1.2..0.4'"),
        (["--mu", "0..1"], r"--y: robot.traction.mu must be > 0 and <= 3, got 0.0"),
        (["--speed", "0.5..1", "--x", "route.max_speed=0.5..1"], r"give --speed or --x for the x axis, not both"),
        (["--steps", "4"], r"--steps must be NXxNY with both >= 2 \(e.g. 5x4\), got '4'"),
        (["--x", "robot.traction.mu=0.5..1"], r"--x and --y must be different keys"),
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
