"""Batch running: results.csv rows, executor and chunk equivalence, resume, kill, failures."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from planners.errors import SkidpadError
from sim import batch as batch_mod
from sim.batch import parse_keep, parse_sweeps, run_batch
from sim.batch_results import header, read_results
from sim.cli import main
from sim.runner import Simulation
from sim.scenario import load_scenario
from sim.scoring import SCORE_KEYS

ROOT = Path(__file__).resolve().parents[2]
COLUMNS = ["scenario", "run", "seed", *SCORE_KEYS]


@pytest.fixture(scope="module")
def short(tmp_path_factory) -> Path:
    """workshop-loop's robot and field on a 2-waypoint route of ~2 m at 100 Hz, with per-run variation."""
    src = (ROOT / "scenarios" / "workshop-loop.toml").read_text()
    head = src.split("[[route.waypoint]]")[0].replace('"../fields/', f'"{ROOT}/fields/')
    tail = src[src.index("[tracker]"):].replace('rate = "200 Hz"\nseed = 1', 'rate = "100 Hz"\nseed = 7')
    text = (
        head + "[[route.waypoint]]\nat = [1.8, 0.9]\n[[route.waypoint]]\nat = [2.6, 1.2]\n\n" + tail
        + '\n[run.vary]\nmass = "8 %"\n"traction.mu" = [0.6, 0.9]\n'
    )
    path = tmp_path_factory.mktemp("sc") / "short.toml"
    path.write_text(text)
    return path


@pytest.fixture(scope="module")
def reference(short, tmp_path_factory):
    """An uninterrupted serial batch of 7 runs in chunks of 3."""
    out = tmp_path_factory.mktemp("ref")
    return run_batch([short], out=out, runs=7, chunk=3)


def _by_run(rows):
    return {(r["scenario"], r["run"]): r for r in rows}


def test_results_have_one_whole_row_per_run_with_the_right_columns(reference):
    cols, rows = read_results(reference.out / "results.csv")
    assert cols == COLUMNS
    assert sorted(r["run"] for r in rows) == list(range(7))
    assert all(r["seed"] == 7 and r["scenario"] == "short" for r in rows)
    assert all(r["status"] == "completed" for r in rows)
    assert len({r["cross_track_max_m"] for r in rows}) == 7  # the runs really differ
    assert isinstance(rows[0]["final_pose_true"], list) and len(rows[0]["final_pose_true"]) == 3
    summary = (reference.out / "summary.csv").read_text().splitlines()
    assert len(summary) == 2 and summary[1].startswith("short,7,0,1.0,")
    assert (reference.out / "summary.png").stat().st_size > 1000
    assert (reference.out / "scenarios" / "short.toml").exists()


def test_run_k_in_a_batch_equals_a_single_simulation_exactly(reference, short):
    sc = load_scenario(short)
    rows = _by_run(reference.rows)
    for k in (0, 5):
        card = Simulation(sc, runs=[k]).run()[0].scorecard
        row = rows[("short", k)]
        for key in SCORE_KEYS:
            assert row[key] == card[key], key


def test_serial_and_processes_give_identical_rows(reference, short, tmp_path):
    par = run_batch([short], out=tmp_path, runs=7, chunk=2, executor="processes", jobs=2)
    assert _by_run(par.rows) == _by_run(reference.rows)


def test_resume_after_deleting_rows_completes_exactly_the_missing_ones(reference, short, tmp_path):
    run_batch([short], out=tmp_path, runs=7, chunk=3)
    lines = (tmp_path / "results.csv").read_text().splitlines(keepends=True)
    kept = lines[0] + lines[1] + lines[3] + lines[6][:40]  # rows 0, 2 and a torn line
    (tmp_path / "results.csv").write_text(kept)
    with pytest.raises(SkidpadError, match="must be absent without --resume"):
        run_batch([short], out=tmp_path, runs=7)
    again = run_batch([short], out=tmp_path, runs=7, chunk=3, resume=True)
    assert again.ran == 5
    assert len(again.rows) == 7
    assert _by_run(again.rows) == _by_run(reference.rows)


def test_a_failing_unit_is_recorded_and_the_batch_goes_on(short, tmp_path, monkeypatch):
    real = batch_mod.run_unit

    def flaky(unit):
        if 2 in unit.runs:
            raise RuntimeError("motor driver\nexploded")
        return real(unit)

    out = run_batch([short], out=tmp_path, runs=6, chunk=2, work=flaky)
    rows = _by_run(out.rows)
    assert out.failures == 2
    assert [rows[("short", k)]["status"] for k in range(6)] == ["completed"] * 2 + ["failed"] * 2 + ["completed"] * 2
    assert rows[("short", 3)]["status_cause"] == "RuntimeError: motor driver exploded"
    assert rows[("short", 3)]["seed"] == 7
    assert out.summary[0]["failed"] == 2 and out.summary[0]["completion_rate"] == pytest.approx(4 / 6)


def test_sweep_columns_groups_and_worst_traces(short, tmp_path):
    out = run_batch([short], out=tmp_path, runs=3, sweeps=["tracker.bandwidth=2,4"], keep_traces="worst:1")
    cols, rows = read_results(tmp_path / "results.csv")
    assert cols == header(["tracker.bandwidth"])
    assert sorted((r["tracker.bandwidth"], r["run"]) for r in rows) == [("2", 0), ("2", 1), ("2", 2), ("4", 0), ("4", 1), ("4", 2)]
    assert [s["n"] for s in out.summary] == [3, 3]
    worst = max((r for r in rows if r["tracker.bandwidth"] == "2"), key=lambda r: r["cross_track_max_m"])
    assert tmp_path / "traces" / f"short__tracker.bandwidth-2__run{worst['run']}.npz" in out.traces
    assert len(out.traces) == 2


def test_option_errors():
    with pytest.raises(SkidpadError, match="--sweep must be key=v1,v2"):
        parse_sweeps(["tracker.bandwidth"])
    with pytest.raises(SkidpadError, match="--keep-traces must be none, worst:K or runs:0,3, got 'worst:x'"):
        parse_keep("worst:x")
    assert parse_sweeps(["a=1,2", "b=x"]) == [(("a", "1"), ("b", "x")), (("a", "2"), ("b", "x"))]


def test_missing_dask_is_one_clear_error(short, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(SkidpadError, match=r"skidpad\[cluster\]"):
        run_batch([short], out=tmp_path, runs=1, executor="dask")


def test_kill_then_resume_equals_an_uninterrupted_batch(reference, short, tmp_path):
    out = tmp_path / "killed"
    cmd = [sys.executable, "-m", "sim", "batch", str(short), "--runs", "7", "--chunk", "1",
           "--out", str(out), "--no-progress"]
    proc = subprocess.Popen(cmd, cwd=ROOT, start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    results = out / "results.csv"
    deadline = time.monotonic() + 60
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if results.exists() and len(results.read_text().splitlines()) >= 3:  # header + 2 rows
                break
            time.sleep(0.02)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    assert proc.returncode == -signal.SIGKILL, proc.stderr.read().decode()
    cols, rows = read_results(results)
    assert cols == COLUMNS and 2 <= len(rows) < 7
    assert all(r == _by_run(reference.rows)[("short", r["run"])] for r in rows)
    assert main(["batch", str(short), "--runs", "7", "--out", str(out), "--resume", "--no-progress"]) == 0
    _, rows = read_results(results)
    assert len(rows) == 7 and _by_run(rows) == _by_run(reference.rows)


def test_dask_local_cluster_equals_serial(reference, short, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(host="127.0.0.1", protocol="tcp", processes=False, n_workers=1, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            out = run_batch([short], out=tmp_path, runs=7, chunk=3, executor="dask", client=client)
    assert _by_run(out.rows) == _by_run(reference.rows)


def test_workers_are_forked_only_when_it_is_safe(monkeypatch):
    import sys
    import threading

    from numba.np.ufunc import parallel

    from sim import batch_executors

    monkeypatch.setattr(parallel, "_is_initialized", False)
    monkeypatch.setattr(threading, "active_count", lambda: 1)
    expect = "fork" if sys.platform == "linux" else batch_executors.start_method()
    assert batch_executors.start_method() == expect
    # another thread (a progress display) or numba's started thread pool: no fork
    monkeypatch.setattr(threading, "active_count", lambda: 2)
    assert batch_executors.start_method() in ("forkserver", "spawn")
    monkeypatch.setattr(threading, "active_count", lambda: 1)
    monkeypatch.setattr(parallel, "_is_initialized", True)
    assert batch_executors.start_method() in ("forkserver", "spawn")
