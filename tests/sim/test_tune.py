"""skidpad tune: finds a brute-forced best lookahead, keeps its budget, scores failures, CIs, errors."""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from planners.errors import SkidpadError
from sim.cli import SAFETY, main
from sim.param_eval import FIGURES, Job, JobResult, evaluate
from sim.param_space import override
from sim.tune import (
    IDENTICAL,
    improvement_interval,
    population_for,
    read_tune_csv,
    run_scores,
    statistic,
    tune,
)

BEND = Path(__file__).resolve().parent / "data" / "bend-skid.toml"
SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"
RUNS = 5
KEY = "tracker.lookahead"


def _objective(value: float) -> float:
    result = evaluate(Job(0, str(BEND), (override(KEY, value),), tuple(range(RUNS))))
    return float(statistic(run_scores(result, "cross_track_p95", 1.0), "cross_track_p95"))


@pytest.fixture(scope="module")
def grid() -> tuple[np.ndarray, np.ndarray]:
    """Brute force: the objective at lookahead 0.03, 0.04, ..., 0.30 m."""
    xs = np.round(np.arange(0.03, 0.305, 0.01), 10)
    return xs, np.array([_objective(x) for x in xs])


@pytest.fixture(scope="module")
def cli_run(tmp_path_factory, grid):
    out = tmp_path_factory.mktemp("tune")
    code = main(["tune", str(BEND), "--param", f"{KEY}=3cm..0.3m", "--runs", str(RUNS),
                 "--objective", "cross_track_p95", "--budget", "22", "--out", str(out), "--no-progress"])
    return code, out


def test_the_brute_forced_objective_has_an_interior_best(grid):
    xs, obj = grid
    k = int(np.argmin(obj))
    # short lookahead oscillates (runs time out), long lookahead cuts the bend: best in between
    assert 0 < k < len(xs) - 1
    assert obj[0] > 10 * obj[k] and obj[-1] > 3 * obj[k]


def test_tune_finds_the_grid_best_within_one_grid_step(cli_run, grid):
    code, out = cli_run
    assert code == 0
    xs, obj = grid
    rows = read_tune_csv(out / "tune.csv")
    best = min(rows, key=lambda r: r["objective"])
    assert abs(best[KEY] - xs[np.argmin(obj)]) <= 0.01 + 1e-9
    assert best["objective"] <= obj.min() * 1.05


def test_tune_keeps_its_budget_and_starts_from_the_scenario_value(cli_run):
    _, out = cli_run
    rows = read_tune_csv(out / "tune.csv")
    assert len(rows) == 22  # population 7 x 4 generations would be 28: cut at the budget
    assert population_for(22, 1) == (7, 3)
    assert rows[0][KEY] == 0.3  # the scenario's lookahead is the first member (x0)
    assert all(0.03 <= r[KEY] <= 0.3 for r in rows)


def test_every_candidate_meets_the_same_runs(cli_run):
    """Common random numbers: a candidate re-evaluated alone scores exactly what tune recorded."""
    _, out = cli_run
    rows = read_tune_csv(out / "tune.csv")
    for r in (rows[3], rows[-1]):
        assert _objective(r[KEY]) == r["objective"]


def test_outputs_best_scenario_plot_and_safety(cli_run):
    _, out = cli_run
    rows = read_tune_csv(out / "tune.csv")
    best = min(rows, key=lambda r: r["objective"])
    assert (out / "tune.png").stat().st_size > 5000
    tuned = (out / "tuned.toml").read_text()
    assert f"lookahead = {best[KEY]!r}" in tuned


def test_cli_prints_best_start_improvement_and_caution(tmp_path, capsys):
    code = main(["tune", str(BEND), "--param", f"{KEY}=0.05m..0.3m", "--runs", "3", "--budget", "5",
                 "--out", str(tmp_path), "--no-progress"])
    text = " ".join(capsys.readouterr().out.split())
    assert code == 0
    assert "start 0.0" in text and "best 0.0" in text and "95% interval" in text
    assert " ".join(SAFETY.split()) in text


def test_the_issue_example_runs_on_the_bundled_pure_pursuit_scenario(tmp_path, capsys):
    """`skidpad tune SCENARIO --param tracker.lookahead=0.1m..0.6m` as written, on the bundled dock route."""
    code = main(["tune", str(SCENARIOS / "dock-pursuit.toml"), "--param", "tracker.lookahead=0.1m..0.6m",
                 "--runs", "2", "--budget", "5", "--out", str(tmp_path), "--no-progress"])
    text = capsys.readouterr().out
    assert code == 0
    rows = read_tune_csv(tmp_path / "tune.csv")
    best = min(rows, key=lambda r: r["objective"])
    # the --set line is short (%g-like), tuned.toml exact
    assert re.search(rf"--set tracker\.lookahead={best[KEY]:.6g}(\s|$)", text)
    tuned = (tmp_path / "tuned.toml").read_text()
    assert f"lookahead = {best[KEY]!r}" in tuned
    comments = " ".join(line[2:] for line in tuned.splitlines() if line.startswith("# "))
    assert " ".join(SAFETY.split()) in comments
    assert main(["run", str(tmp_path / "tuned.toml"), "--out", str(tmp_path / "run"), "--no-plot"]) == 0


def test_runs_without_randomness_get_no_interval(tmp_path, capsys):
    code = main(["tune", str(SCENARIOS / "long-straight-skid.toml"), "--set", 'tracker.kind="pure-pursuit"',
                 "--param", "tracker.lookahead=0.2m..0.4m", "--runs", "2", "--budget", "5",
                 "--out", str(tmp_path), "--no-progress"])
    text = " ".join(capsys.readouterr().out.split())
    assert code == 0
    assert "no interval: all 2 runs of each candidate scored the same" in text
    assert "the scenario has no [run.vary], so the runs carry no randomness" in text
    assert "95% interval" not in text


def test_identical_runs_have_no_interval():
    gain, lo, hi, method = improvement_interval(np.full(5, 0.04), np.full(5, 0.03), "cross_track_p95")
    assert gain == pytest.approx(0.01) and math.isnan(lo) and math.isnan(hi) and method == IDENTICAL


def test_a_key_the_tracker_kind_lacks_names_the_kinds_that_have_it(capsys):
    code = main(["tune", str(SCENARIOS / "aisle-s-skid.toml"), "--param", "tracker.lookahead=0.1m..0.6m"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1
    assert re.search(r"aisle-s-skid.toml: --param tracker.lookahead: the lqr tracker has no key 'lookahead' "
                     r"\(its numeric keys: max_position_error, .*\); choose a tracker that has it with "
                     r"--set tracker.kind=pure-pursuit$", err[0])
    assert "did you mean" not in err[0]


def _result(status, fig, timeout=12.0) -> JobResult:
    fig = np.asarray(fig, dtype=float)
    return JobResult(0, list(status), {f: fig.copy() for f in FIGURES}, timeout)


def test_runs_that_do_not_complete_score_at_least_the_penalty():
    r = _result(["completed", "timeout", "diverged", "collided"], [0.02, 0.4, math.nan, 3.0])
    np.testing.assert_array_equal(run_scores(r, "cross_track_p95", 1.0), [0.02, 1.0, 1.0, 3.0])
    np.testing.assert_array_equal(run_scores(r, "duration", 1.0), [0.02, 12.0, 12.0, 12.0])
    failed = _result(["failed"] * 2, [math.nan] * 2, timeout=math.nan)
    np.testing.assert_array_equal(run_scores(failed, "duration", 30.0), [30.0, 30.0])


def test_mean_interval_matches_scipy_paired_t_test():
    rng = np.random.default_rng(4)
    start = rng.normal(0.05, 0.01, 30)
    best = start - rng.normal(0.01, 0.004, 30)
    gain, lo, hi, method = improvement_interval(start, best, "cross_track_p95")
    # reference: scipy.stats.ttest_rel confidence interval of the mean paired difference
    ci = stats.ttest_rel(start, best).confidence_interval(0.95)
    assert gain == pytest.approx(np.mean(start - best), rel=1e-12)
    assert (lo, hi) == pytest.approx((ci.low, ci.high), rel=1e-9)
    assert "t SE" in method


def test_p95_interval_of_a_constant_shift_is_the_shift():
    start = np.random.default_rng(5).uniform(0.01, 0.08, 40)
    gain, lo, hi, method = improvement_interval(start, start - 0.01, "end_error_p95")
    # the 95th percentile is shift-equivariant, so every paired resample differs by 0.01 exactly
    assert (gain, lo, hi) == pytest.approx((0.01, 0.01, 0.01), abs=1e-12)
    assert method == "paired bootstrap"


@pytest.mark.parametrize(
    "param, match",
    [
        (f"{KEY}=0.6m..0.1m", r"bend-skid.toml: --param: tracker.lookahead range must be low..high with low < high, got '0.6m..0.1m'"),
        (f"{KEY}=0.1s..0.5m", r"tracker.lookahead must be a length .* got '0.1s' \(a time\)"),
        (f"{KEY}=0..0.5", r"tracker.lookahead must be > 0, got 0.0"),
        ("tracker.lookahed=0.1..0.5", r"tracker.lookahed: must be a numeric scenario key; did you mean tracker.lookahead\?"),
        (f"{KEY}=0.3m", r"range must be low..high \(e.g. tracker.lookahead=0.1m..0.6m\), got '0.3m'"),
    ],
)
def test_bad_param_range_is_one_line_with_exit_code_2(param, match, capsys, tmp_path):
    code = main(["tune", str(BEND), "--param", param, "--runs", "2", "--budget", "5", "--out", str(tmp_path)])
    captured = capsys.readouterr()
    assert code == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("skidpad tune: ")
    assert re.search(match, lines[0])
    assert not (tmp_path / "tune.csv").exists()


def test_budget_below_the_smallest_population_is_refused():
    with pytest.raises(SkidpadError, match=r"--budget must be >= 5 .* got 4"):
        tune(BEND, [f"{KEY}=0.05..0.3"], runs=2, objective="cross_track_p95", budget=4)
