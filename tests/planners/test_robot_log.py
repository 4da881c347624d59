"""The robot log CSV: reading, unit conversion, writing, and one-line errors with the row."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planners.errors import LogError
from planners.log_readings import log_readings
from planners.log_writer import write_log
from planners.robot_log import read_log

GOOD = """# counts_per_rev = 1024
# wheel_radius = 0.05
t [ms], duty_left [%], duty_right [1], battery [V], position_left [counts], position_right [rev], yaw_rate [deg/s]
0, 10, 0.1, 12.0, 0, 0, 0
10, 20, 0.2, 11.5, 512, 0.25, 90
20, 30, 0.3, 11.0, 1024, 0.5,
"""


def write(tmp_path, text: str):
    path = tmp_path / "log.csv"
    path.write_text(text)
    return path


def test_units_convert_to_si(tmp_path):
    log = read_log(write(tmp_path, GOOD))
    assert log.wheels == ("left", "right")
    np.testing.assert_allclose(log.t, [0.0, 0.01, 0.02])
    # duty in % times battery; duty in 1 times battery
    np.testing.assert_allclose(log.wheel_voltage(), [[1.2, 1.2], [2.3, 2.3], [3.3, 3.3]])
    # 512 of 1024 counts = pi rad; 0.25 rev = pi / 2 rad
    np.testing.assert_allclose(log.wheel_position()[1], [math.pi, math.pi / 2])
    assert log.column("yaw_rate")[1] == pytest.approx(math.pi / 2)
    assert math.isnan(log.column("yaw_rate")[2])
    assert log.meta["wheel_radius"] == "0.05"


def test_write_then_read_round_trip(tmp_path):
    t = np.arange(5) * 0.005
    cols = {
        "voltage_fl": ("V", np.linspace(0, 1, 5)), "voltage_fr": ("V", np.ones(5)),
        "voltage_rl": ("V", np.ones(5)), "voltage_rr": ("V", np.ones(5)),
        "position_fl": ("rad", np.array([0.0, 0.1, np.nan, 0.3, 0.4])),
        "position_fr": ("rad", np.zeros(5)), "position_rl": ("rad", np.zeros(5)), "position_rr": ("rad", np.zeros(5)),
        "fix_x": ("m", np.array([np.nan, 1.0, np.nan, np.nan, 2.0])),
        "fix_y": ("m", np.array([np.nan, 1.5, np.nan, np.nan, 2.5])),
        "fix_heading": ("rad", np.array([np.nan, 0.1, np.nan, np.nan, 0.2])),
    }
    path = write_log(tmp_path / "w.csv", t, cols, meta={"fix_latency": 0.01})
    log = read_log(path)
    assert log.wheels == ("fl", "fr", "rl", "rr")
    np.testing.assert_allclose(log.t, t)
    np.testing.assert_allclose(log.wheel_voltage()[:, 0], np.linspace(0, 1, 5))
    rows = list(log_readings(log))
    # a missing encoder sample holds the last one; fixes only on their rows, dated by latency
    assert rows[2].encoder_counts[0, 0] == pytest.approx(0.1)
    assert [bool(r.fix_valid[0]) for r in rows] == [False, True, False, False, True]
    assert rows[4].fix_time[0] == pytest.approx(0.02 - 0.01)
    np.testing.assert_allclose(rows[1].fix[0], [1.0, 1.5, 0.1])


@pytest.mark.parametrize(
    "change, match",
    [
        (lambda s: s.replace("duty_right [1], ", "").replace("0.1, 12.0", "12.0").replace("0.2, 11.5", "11.5").replace("0.3, 11.0", "11.0"),
         r"wheel labels|missing|duty_right"),
        (lambda s: s.replace("11.5", "eleven"), r"row 5, column 'battery': must be a number, got 'eleven'"),
        (lambda s: s.replace("\n20,", "\n5,"), r"row 6: time must increase, got t = 0.005 s after 0.01 s"),
        (lambda s: s.replace("\n20,", "\n5020,"), r"row 6: gap of 5.01 s in time"),
        (lambda s: s.replace("battery [V]", "battery [mV]"), r"column 'battery' unit must be one of V, got 'mV'"),
        (lambda s: s.replace("# counts_per_rev = 1024\n", ""), r"needs the metadata line '# counts_per_rev = \.\.\.'"),
        (lambda s: s.replace("yaw_rate", "yaw_rat"), r"line 3: unknown column 'yaw_rat'; did you mean yaw_rate\?"),
        (lambda s: s.replace("t [ms]", "time [ms]"), r"unknown column 'time'"),
        (lambda s: s.replace(", 0.5,\n", ", 0.5\n"), r"row 6 has 6 cells, the header has 7"),
        (lambda s: s.replace("t [ms]", "t"), r"header cell 't' must be 'name \[unit\]'"),
        (lambda s: s.replace("\n10,", "\n0.01,").replace("\n20,", "\n0.02,"),
         r"line 3 \(header\), column 't \[ms\]': rows are 1e-05 s apart \(median\), 1e\+05 Hz; a robot log must be "
         r"sampled between 2 Hz and 5000 Hz; if the times are in seconds, label the column 't \[s\]'$"),
        (lambda s: s.replace("t [ms]", "t [s]"),
         r"column 't \[s\]': rows are at least 10 s apart; .*; if the times are in milliseconds, label the column 't \[ms\]'$"),
    ],
    ids=["missing-wheel", "text", "backwards", "gap", "unit", "metadata", "typo", "no-time", "short-row", "no-unit",
         "seconds-as-ms", "ms-as-seconds"],
)
def test_bad_logs_name_the_file_and_row(tmp_path, change, match):
    path = write(tmp_path, change(GOOD))
    with pytest.raises(LogError, match=match) as info:
        log = read_log(path)
        log.wheel_voltage()
    assert str(path) in str(info.value)
    assert "\n" not in str(info.value)


def test_missing_column_is_named(tmp_path):
    log = read_log(write(tmp_path, GOOD))
    with pytest.raises(LogError, match=r"needs column 'yaw'"):
        log.column("yaw")
    with pytest.raises(LogError, match=r"needs pod columns"):
        log.pods()
