"""``skidpad identify --kind feedforward``: output forms, plot, warnings and bad logs."""

from __future__ import annotations

import json
import re

import pytest

from sim.cli import SAFETY, main
from sim.commands.identify import KINDS
from tests.planners.ff_logs import KA, KS, KV, STEPS, write_ff_log

KEYS = {"kS", "kV", "kA", "kS_se", "kV_se", "kA_se", "r2", "wheels", "units"}


@pytest.fixture
def step_log(tmp_path):
    return write_ff_log(tmp_path / "steps.csv", STEPS)


def test_json_is_one_object_with_the_constants(step_log, capsys):
    assert main(["identify", "--kind", "feedforward", str(step_log), "--json"]) == 0
    out, err = capsys.readouterr()
    assert len(out.strip().splitlines()) == 1
    doc = json.loads(out)
    assert KEYS <= doc.keys()
    assert doc["kS"] == pytest.approx(KS, rel=0.01)
    assert doc["kV"] == pytest.approx(KV, rel=0.01)
    assert doc["kA"] == pytest.approx(KA, rel=0.01)
    assert 0.0 < doc["kA_se"] < 0.01 * doc["kA"] and doc["r2"] > 0.999
    assert doc["wheels"].keys() == {"left", "right"}
    assert {"kS", "kS_se", "r2", "n"} <= doc["wheels"]["left"].keys()
    assert doc["units"]["kA"] == "V s^2/rad"
    smoother = doc["smoother"]
    assert (smoother["method"], smoother["window_s"], smoother["window_samples"], smoother["order"]) == ("savgol", 0.15, 31, 4)
    assert smoother["dt_s"] == pytest.approx(0.005, rel=1e-9)
    assert (step_log.parent / "steps.residuals.png").stat().st_size > 10_000  # default plot beside the log
    assert SAFETY in err and "warning" not in err


def test_text_output_one_wheel_and_plot_path(step_log, tmp_path, capsys):
    plot = tmp_path / "res.png"
    assert main(["identify", "--kind", "feedforward", str(step_log), "--wheel", "right", "--plot", str(plot)]) == 0
    out = capsys.readouterr().out
    assert "right" in out and "left " not in out and "pooled" not in out
    assert f"wrote {plot}" in out and plot.exists() and SAFETY in out


def test_smoother_options_reach_the_fit(step_log, capsys):
    assert main(["identify", "--kind", "feedforward", str(step_log), "--json", "--no-plot", "--window", "0.1"]) == 0
    assert json.loads(capsys.readouterr().out)["smoother"]["window_samples"] == 21
    assert main(["identify", "--kind", "feedforward", str(step_log), "--no-plot", "--order", "1"]) == 2
    assert "order must be an integer >= 2" in capsys.readouterr().err


def test_warns_when_ka_is_not_separable(tmp_path, capsys):
    log = write_ff_log(tmp_path / "cruise.csv", [(4.0, 6.0)], v0=(6.0 - KS) / KV, noise=0.5, volt_noise=0.02)
    assert main(["identify", "--kind", "feedforward", str(log), "--json", "--no-plot"]) == 0
    out, err = capsys.readouterr()
    assert json.loads(out)["ka_separable"] is False
    assert "warning: kA is not separable" in err and "step test" in err


def test_rehearsal_scenario_log_round_trips_through_the_command_line(tmp_path, capsys):
    log = tmp_path / "cart.csv"
    args = ["run", "scenarios/characterise-ramp-step-skid.toml", "--out", str(tmp_path / "run"), "--log", str(log), "--no-plot"]
    assert main(args) == 0
    capsys.readouterr()
    assert main(["identify", "--kind", "feedforward", str(log), "--json", "--no-plot"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["kV"] == pytest.approx(0.29137, rel=0.01)  # the motor model's kV for this cart
    assert doc["wheels"].keys() == {"left", "right"}


def test_kinds_drive_the_choices():
    assert "feedforward" in KINDS and all(callable(h) for h in KINDS.values())
    with pytest.raises(SystemExit) as exc:
        main(["identify", "--kind", "nonsense", "x.csv"])
    assert exc.value.code == 2


# edits of the step log's lines (line 1 metadata, line 2 header, data from line 3)
def _drop_position_right(lines):
    lines[1] = lines[1].replace(",position_right [counts]", "")
    lines[2:] = [row.rsplit(",", 1)[0] for row in lines[2:]]


def _text_in_number(lines):
    cells = lines[6].split(",")
    lines[6] = ",".join([cells[0], "abc", *cells[2:]])


def _time_backwards(lines):
    lines[9] = "0.001" + lines[9][lines[9].index(","):]


def _five_second_gap(lines):
    lines[20:] = [f"{float(row.split(',')[0]) + 5.0:.6f}" + row[row.index(","):] for row in lines[20:]]


@pytest.mark.parametrize(
    "edit, message",
    [
        (_drop_position_right, r"line 2 \(header\): needs column 'position_right'"),
        (_text_in_number, r"row 7, column 'voltage_left': must be a number, got 'abc'"),
        (_time_backwards, r"row 10: time must increase, got t = 0.001 s after 0.03 s"),
        (_five_second_gap, r"row 21: gap of 5.005 s in time"),
    ],
    ids=["missing-column", "text-in-number", "time-backwards", "gap"],
)
def test_bad_logs_give_one_line_with_the_row(step_log, capsys, edit, message):
    lines = step_log.read_text().splitlines()
    edit(lines)
    step_log.write_text("\n".join(lines) + "\n")
    assert main(["identify", "--kind", "feedforward", str(step_log), "--no-plot"]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1
    assert re.search(message, err), err
    assert err.startswith(f"skidpad identify: {step_log}")
