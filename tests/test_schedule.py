"""Weekly setpoint schedules: TOML parsing, the setpoint series, bad input naming file and key."""

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from thermorc.errors import InputError
from thermorc.schedule import Schedule, occupied_mask, parse_schedule, read_schedule, setpoint_series

PROGRAM = """
holidays = ["01-01"]

[levels]
occupied_c = 21.0
setback_c = 16.5

[week]
weekdays = [["06:30", "occupied"], ["08:30", "setback"], ["17:00", "occupied"], ["22:30", "setback"]]
weekend = [["08:00", "occupied"], ["23:00", "setback"]]

[[away]]
start = "01-03"
end = "01-03"
setpoint_c = 12.0
"""


def _hourly(start, days, tz="UTC-05:00"):
    return pd.date_range(start, periods=24 * days, freq="h", tz=tz)


@pytest.fixture
def program(tmp_path):
    path = tmp_path / "home.toml"
    path.write_text(PROGRAM, encoding="utf-8")
    return read_schedule(path)


def test_weekday_program_holiday_and_away(program):
    # Calendar fact (Gregorian calendar): 1 January 1990 was a Monday, so it is a weekday that
    # the file declares a holiday; holidays follow Sunday's program by default.
    assert dt.date(1990, 1, 1).weekday() == 0
    sp = setpoint_series(program, _hourly("1990-01-01", 4)).to_numpy().reshape(4, 24)
    sunday = np.where((np.arange(24) >= 8) & (np.arange(24) < 23), 21.0, 16.5)
    np.testing.assert_array_equal(sp[0], sunday)
    # Tuesday: 06:30 change lands inside the 06:00 hour, so 07:00 is the first occupied stamp.
    weekday = np.full(24, 16.5)
    weekday[7:9] = 21.0
    weekday[17:23] = 21.0
    np.testing.assert_array_equal(sp[1], weekday)
    np.testing.assert_array_equal(sp[2], np.full(24, 12.0))  # 3 January: away all day
    np.testing.assert_array_equal(sp[3], weekday)


def test_setpoint_carries_over_midnight():
    sched = parse_schedule({"week": {"everyday": [["07:00", 20.0], ["23:00", 15.0]]}})
    sp = setpoint_series(sched, pd.date_range("2025-03-03", periods=48, freq="30min", tz="UTC"))
    # Before 07:00 the previous day's last setpoint (23:00 -> 15 degC) still holds.
    assert sp.iloc[0] == 15.0 and sp.iloc[13] == 15.0 and sp.iloc[14] == 20.0 and sp.iloc[46] == 15.0


def test_named_day_overrides_group_and_inline_tables():
    sched = parse_schedule({
        "week": {
            "everyday": [{"at": "00:00", "setpoint_c": 18.0}],
            "friday": [{"at": "00:00", "setpoint_c": 19.0}],
        }
    })
    # 2025-03-07 was a Friday (Gregorian calendar).
    sp = setpoint_series(sched, pd.date_range("2025-03-06", periods=3, freq="D", tz="UTC"))
    assert list(sp) == [18.0, 19.0, 18.0]


def test_schedule_follows_the_index_clock_across_dst():
    sched = parse_schedule({"week": {"everyday": [["07:00", 21.0], ["22:00", 16.0]]}})
    # US DST began on 2025-03-09 (Energy Policy Act of 2005): 07:00 local is 12:00 UTC before, 11:00 UTC after.
    idx = pd.date_range("2025-03-08 10:00", periods=72, freq="h", tz="UTC").tz_convert("America/New_York")
    sp = setpoint_series(sched, idx)
    first = sp[sp == 21.0].index
    assert first[0].tz_convert("UTC").hour == 12
    assert any(t.tz_convert("UTC").hour == 11 and t.day == 9 for t in first)


def test_constant_and_occupied(program):
    idx = _hourly("1990-01-02", 1)
    assert (setpoint_series(20.0, idx) == 20.0).all()
    assert (setpoint_series(Schedule.constant(19.5), idx) == 19.5).all()
    assert parse_schedule({"constant_c": 19.0}).constant_c == 19.0
    sp = setpoint_series(program, idx)
    occ = occupied_mask(program, sp)
    assert occ.sum() == 8 and (sp[occ] == 21.0).all()
    assert occupied_mask(20.0, sp).all()


def test_away_with_times_and_wrapping_range():
    sched = parse_schedule({
        "week": {"everyday": [["00:00", 20.0]]},
        "away": [
            {"start": "2025-02-01T08:00", "end": "2025-02-01T12:00", "setpoint_c": 10.0},
            {"start": "12-30", "end": "01-01", "setpoint_c": 11.0},
        ],
    })
    idx = pd.date_range("2025-02-01", periods=24, freq="h", tz="UTC")
    sp = setpoint_series(sched, idx)
    assert list(sp.iloc[7:13]) == [20.0, 10.0, 10.0, 10.0, 10.0, 20.0]
    days = pd.date_range("2025-12-29", periods=5, freq="D", tz="UTC")
    assert list(setpoint_series(sched, days)) == [20.0, 11.0, 11.0, 11.0, 20.0]


@pytest.mark.parametrize(
    "text, column, match",
    [
        ("[week]\nweekdays = [[\"06:30\", 20.0]]\n", "week", "no program for saturday"),
        ("[week]\neveryday = [[\"25:00\", 20.0]]\n", "week.everyday[0]", "clock time"),
        ("[week]\neveryday = [[\"06:00\", 20.0], [\"05:00\", 16.0]]\n", "week.everyday", "increasing"),
        ("[week]\neveryday = [[\"06:00\", \"cosy\"]]\n", "week.everyday[0]", "unknown level"),
        ("[week]\neveryday = [[\"06:00\", 80.0]]\n", "week.everyday[0]", "plausible range"),
        ("[week]\neveryday = [[\"06:00\", 20.0]]\nholidays = [\"13-40\"]\n", "week.holidays", "unknown key"),
        ("holidays = [\"13-40\"]\n[week]\neveryday = [[\"06:00\", 20.0]]\n", "holidays[0]", "not a date"),
        ("constant_c = \"warm\"\n", "constant_c", "not a number"),
        ("[levels]\nsetback = 16\n[week]\neveryday = [[\"06:00\", 20.0]]\n", "levels.setback", "_c"),
        ("[[away]]\nstart = \"01-03\"\n[week]\neveryday = [[\"06:00\", 20.0]]\n", "away[0].end", "missing"),
        ("colour = 3\n[week]\neveryday = [[\"06:00\", 20.0]]\n", "colour", "unknown key"),
    ],
)
def test_bad_input_names_file_and_key(tmp_path, text, column, match):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=match) as info:
        read_schedule(path)
    assert info.value.path == str(path) and info.value.column == column
    assert str(info.value).startswith("bad.toml, column")


def test_toml_syntax_error_has_the_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text("[week]\neveryday = [[\"06:00\" 20.0]]\n", encoding="utf-8")
    with pytest.raises(InputError, match="invalid TOML") as info:
        read_schedule(path)
    assert info.value.row == 2
