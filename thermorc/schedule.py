r"""
Weekly setpoint schedules: a thermostat program as a TOML file, turned into a setpoint series.

A schedule is either one constant setpoint or a weekly program: for each weekday a list of
change points (a clock time and the setpoint that holds from then on), plus holidays (which
follow a holiday program, by default Sunday's) and away date ranges (one setpoint over the
whole range). Between the last change point of a day and the first of the next, the last
setpoint carries over midnight, as a programmable thermostat does. The program runs on the
clock of the index it is applied to: give the index in the home's own time zone.

The file format is documented with examples in docs/forecasting.md; in short::

    [levels]                 # named setpoints [degC]; optional
    occupied_c = 21.0
    setback_c = 16.5

    [week]                   # monday ... sunday, or the groups weekdays / weekend / everyday
    weekdays = [["06:30", "occupied"], ["08:30", "setback"], ["17:00", "occupied"],
                ["22:30", "setback"]]
    weekend = [["08:00", "occupied"], ["23:00", "setback"]]

    holidays = ["12-25", "2026-11-26"]        # MM-DD every year, or one date

    [[away]]
    start = "12-20"          # date (or date and time), inclusive
    end = "12-27"            # date: to the end of that day; date and time: up to it
    setpoint_c = 12.0

A file with only ``constant_c = 20.0`` is the simple case.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import re
import tomllib
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.errors import InputError
from thermorc.read import check_file, read_text

__all__ = ["Schedule", "read_schedule", "parse_schedule", "setpoint_series", "occupied_mask", "DAYS"]

#: Weekday keys in pandas order (Monday = 0).
DAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")
_GROUPS = {"everyday": range(7), "weekdays": range(5), "weekend": (5, 6)}
_HOLIDAY = 7  # profile number of the holiday program

#: Plausible range of a heating setpoint [degC]: below 0 water freezes, above 35 is not a home.
SETPOINT_RANGE_C = (0.0, 35.0)

_TOP_KEYS = {"constant_c", "levels", "week", "holidays", "away", "name", "description"}


@dataclass
class Schedule:
    """
    A weekly setpoint program.

    Attributes
    ----------
    profiles : dict
        Profile number (0 = Monday ... 6 = Sunday, 7 = holiday) -> ``(minutes, setpoints)``:
        change points as minutes after midnight (ascending) and the setpoint from each on. [min, °C]
    holidays : list of tuple
        ``(year or None, month, day)``; ``None`` repeats every year.
    away : list of tuple
        ``(start, end, setpoint_c)`` with naive local datetimes, ``start <= t < end``.
    occupied_c : float
        Setpoint at or above which an interval counts as occupied. [°C]
    name : str
        Label for reports.
    constant_c : float or None
        Set when the schedule is one constant setpoint. [°C]
    """

    profiles: dict
    holidays: list = field(default_factory=list)
    away: list = field(default_factory=list)
    occupied_c: float = math.nan
    name: str = "schedule"
    constant_c: float | None = None

    @classmethod
    def constant(cls, setpoint_c, name=None):
        """
        A schedule that holds one setpoint all the time.

        Parameters
        ----------
        setpoint_c : float
            Setpoint. [°C]
        name : str, optional
            Label.

        Returns
        -------
        Schedule
        """
        value = _setpoint(setpoint_c, None, "constant_c")
        prof = (np.array([0.0]), np.array([value]))
        return cls(profiles={p: prof for p in range(8)}, occupied_c=value,
                   name=name or f"constant {value:g} degC", constant_c=value)

    @property
    def setpoints_c(self):
        """Every setpoint the program uses (weekly, holiday and away). [°C]"""
        values = [v for _, sp in self.profiles.values() for v in sp]
        values += [a[2] for a in self.away]
        return sorted(set(float(v) for v in values))

    def __repr__(self):
        if self.constant_c is not None:
            return f"Schedule({self.name!r}, constant {self.constant_c:g} degC)"
        return (f"Schedule({self.name!r}, setpoints {self.setpoints_c} degC, {len(self.holidays)} holidays, "
                f"{len(self.away)} away ranges)")


def read_schedule(path):
    """
    Read a weekly setpoint schedule from a TOML file.

    Parameters
    ----------
    path : str or os.PathLike
        The schedule file (format in docs/forecasting.md).

    Returns
    -------
    Schedule

    Raises
    ------
    InputError
        Unreadable file, TOML syntax error (with its line), or a bad key, naming the key.
    """
    data = read_toml(path)
    return parse_schedule(data, path=path)


def read_toml(path):
    """
    Parse a TOML file, with syntax errors as :class:`InputError` carrying the line.

    Parameters
    ----------
    path : str or os.PathLike
        The file.

    Returns
    -------
    dict
    """
    path = check_file(path)
    text = read_text(path)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"\(at line (\d+), column (\d+)\)", str(exc))
        row = int(match.group(1)) if match else None
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", str(exc))
        raise InputError(f"invalid TOML: {msg}", path=path, row=row) from None


def parse_schedule(data, path=None, prefix="", name=None):
    """
    Build a :class:`Schedule` from parsed TOML.

    Parameters
    ----------
    data : dict
        The schedule table (see the module docstring).
    path : str, optional
        File name for error messages.
    prefix : str
        Key path of the table inside its file (e.g. ``"strategy[2]."``), for error messages.
    name : str, optional
        Label; default: the ``name`` key, else the file name.

    Returns
    -------
    Schedule

    Raises
    ------
    InputError
        Naming the file and the key that is wrong.
    """
    if not isinstance(data, dict):
        raise InputError("expected a table", path=path, column=prefix.rstrip(".") or None)
    label = name or data.get("name") or (os.path.basename(os.fspath(path)) if path else "schedule")
    if "constant_c" in data:
        extra = [k for k in data if k in _TOP_KEYS and k not in ("constant_c", "name", "description")]
        if extra:
            raise InputError(f"constant_c cannot be combined with {extra} (expected either a constant "
                             "setpoint or a weekly program)", path=path, column=prefix + "constant_c")
        return Schedule.constant(_setpoint(data["constant_c"], path, prefix + "constant_c"), name=str(label))
    levels = {}
    raw_levels = data.get("levels", {})
    if not isinstance(raw_levels, dict):
        raise InputError("expected a table of named setpoints [degC]", path=path, column=prefix + "levels")
    for key, value in raw_levels.items():
        if not key.endswith("_c"):
            raise InputError(f"level name '{key}' must end in _c (a setpoint in degC, e.g. setback_c)",
                             path=path, column=f"{prefix}levels.{key}")
        levels[key[:-2]] = _setpoint(value, path, f"{prefix}levels.{key}")
    week = data.get("week")
    if week is None:
        raise InputError("missing (expected constant_c = <degC>, or a [week] table of change points)",
                         path=path, column=prefix + "week")
    if not isinstance(week, dict):
        raise InputError("expected a table with monday ... sunday, weekdays, weekend, everyday or holiday",
                         path=path, column=prefix + "week")
    profiles = {}
    allowed = set(DAYS) | set(_GROUPS) | {"holiday"}
    unknown = [k for k in week if k not in allowed]
    if unknown:
        raise InputError(f"unknown key '{unknown[0]}' (expected one of {', '.join(DAYS)}, weekdays, weekend, "
                         "everyday, holiday)", path=path, column=f"{prefix}week.{unknown[0]}")
    # Groups first, then single days, so a named day overrides its group.
    for key in ("everyday", "weekdays", "weekend", *DAYS, "holiday"):
        if key not in week:
            continue
        prof = _profile(week[key], levels, path, f"{prefix}week.{key}")
        targets = _GROUPS.get(key, (DAYS.index(key),) if key in DAYS else (_HOLIDAY,))
        for day in targets:
            profiles[day] = prof
    missing = [DAYS[d] for d in range(7) if d not in profiles]
    if missing:
        raise InputError(f"no program for {', '.join(missing)} (expected every weekday covered by a day "
                         "or a group: weekdays, weekend, everyday)", path=path, column=prefix + "week")
    profiles.setdefault(_HOLIDAY, profiles[6])
    holidays = _holidays(data.get("holidays", []), path, prefix + "holidays")
    away = _away(data.get("away", []), levels, path, prefix + "away")
    unknown = [k for k in data if k not in _TOP_KEYS]
    if unknown:
        raise InputError(f"unknown key '{unknown[0]}' (expected {', '.join(sorted(_TOP_KEYS))})",
                         path=path, column=prefix + unknown[0])
    weekly = [v for d in range(8) for v in profiles[d][1]]
    occupied = levels.get("occupied", max(weekly))
    return Schedule(profiles=profiles, holidays=holidays, away=away, occupied_c=float(occupied), name=str(label))


def _setpoint(value, path, key):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{value!r} is not a number (expected a setpoint in degC)", path=path, column=key)
    try:
        v = float(value)
    except OverflowError:  # a TOML integer beyond the float range
        v = math.inf
    lo, hi = SETPOINT_RANGE_C
    if not (math.isfinite(v) and lo <= v <= hi):
        raise InputError(f"{v:g} degC is outside the plausible range (expected {lo:g} to {hi:g} degC)",
                         path=path, column=key)
    return v


def _clock_minutes(value, path, key):
    if not isinstance(value, str) or not re.fullmatch(r"\d{1,2}:\d{2}", value.strip()):
        raise InputError(f"{value!r} is not a clock time (expected \"HH:MM\", 00:00 to 23:59)", path=path, column=key)
    h, m = (int(x) for x in value.strip().split(":"))
    if h > 23 or m > 59:
        raise InputError(f"{value!r} is not a clock time (expected \"HH:MM\", 00:00 to 23:59)", path=path, column=key)
    return 60.0 * h + m


def _level(value, levels, path, key):
    if isinstance(value, str):
        name = value[:-2] if value.endswith("_c") else value
        if name not in levels:
            known = ", ".join(levels) or "none defined"
            raise InputError(f"unknown level '{value}' (expected a number in degC or a name from [levels]: "
                             f"{known})", path=path, column=key)
        return levels[name]
    return _setpoint(value, path, key)


def _profile(entries, levels, path, key):
    if not isinstance(entries, list) or not entries:
        raise InputError("expected a list of change points like [[\"06:30\", 21.0], [\"22:30\", \"setback\"]]",
                         path=path, column=key)
    minutes, values = [], []
    for i, entry in enumerate(entries):
        where = f"{key}[{i}]"
        if isinstance(entry, dict):
            unknown = [k for k in entry if k not in ("at", "setpoint_c", "level")]
            if unknown or "at" not in entry or (("setpoint_c" in entry) == ("level" in entry)):
                raise InputError("expected {at = \"HH:MM\", setpoint_c = <degC>} or {at = \"HH:MM\", level = "
                                 "\"<name>\"}", path=path, column=where)
            at, sp = entry["at"], entry.get("setpoint_c", entry.get("level"))
        elif isinstance(entry, list) and len(entry) == 2:
            at, sp = entry
        else:
            raise InputError(f"{entry!r} is not a change point (expected [\"HH:MM\", <degC or level name>])",
                             path=path, column=where)
        minutes.append(_clock_minutes(at, path, where))
        values.append(_level(sp, levels, path, where))
    if any(b <= a for a, b in zip(minutes, minutes[1:])):
        raise InputError("change points are not in increasing clock order (expected each time later than the "
                         "one before)", path=path, column=key)
    return np.array(minutes), np.array(values)


def _holidays(entries, path, key):
    if not isinstance(entries, list):
        raise InputError("expected a list of dates like [\"12-25\", \"2026-11-26\"]", path=path, column=key)
    out = []
    for i, entry in enumerate(entries):
        out.append(_date(entry, path, f"{key}[{i}]"))
    return out


def _date(value, path, key):
    if isinstance(value, _dt.date) and not isinstance(value, _dt.datetime):
        return (value.year, value.month, value.day)
    text = str(value).strip() if isinstance(value, str) else None
    if text and re.fullmatch(r"\d{1,2}-\d{1,2}", text):
        month, day = (int(x) for x in text.split("-"))
        try:
            _dt.date(2000, month, day)  # a leap year accepts 02-29
        except ValueError:
            text = None
        else:
            return (None, month, day)
    if text and re.fullmatch(r"\d{4}-\d{2}-\d{2}", text):
        try:
            d = _dt.date.fromisoformat(text)
        except ValueError:
            text = None
        else:
            return (d.year, d.month, d.day)
    raise InputError(f"{value!r} is not a date (expected \"MM-DD\" for every year or \"YYYY-MM-DD\")",
                     path=path, column=key)


def _moment(value, path, key, end):
    """A naive datetime, or ``(None, month, day, minutes)`` for an every-year date."""
    if isinstance(value, _dt.datetime):
        return value.replace(tzinfo=None), False
    if isinstance(value, str) and "T" in value:
        try:
            return _dt.datetime.fromisoformat(value.strip()).replace(tzinfo=None), False
        except ValueError:
            raise InputError(f"{value!r} is not a date and time (expected \"YYYY-MM-DDTHH:MM\")",
                             path=path, column=key) from None
    y, m, d = _date(value, path, key)
    return (y, m, d), True


def _away(entries, levels, path, key):
    if isinstance(entries, dict):
        entries = [entries]
    if not isinstance(entries, list):
        raise InputError("expected [[away]] tables with start, end and setpoint_c (or level)", path=path, column=key)
    out = []
    for i, entry in enumerate(entries):
        where = f"{key}[{i}]"
        if not isinstance(entry, dict):
            raise InputError("expected a table with start, end and setpoint_c (or level)", path=path, column=where)
        unknown = [k for k in entry if k not in ("start", "end", "setpoint_c", "level")]
        if unknown:
            raise InputError(f"unknown key '{unknown[0]}' (expected start, end, setpoint_c or level)",
                             path=path, column=f"{where}.{unknown[0]}")
        for k in ("start", "end"):
            if k not in entry:
                raise InputError("missing (expected a date \"MM-DD\" / \"YYYY-MM-DD\" or a date and time)",
                                 path=path, column=f"{where}.{k}")
        if "setpoint_c" in entry:
            sp = _setpoint(entry["setpoint_c"], path, f"{where}.setpoint_c")
        elif "level" in entry:
            sp = _level(entry["level"], levels, path, f"{where}.level")
        elif "away" in levels:
            sp = levels["away"]
        else:
            raise InputError("missing (expected setpoint_c, a level, or away_c in [levels])",
                             path=path, column=f"{where}.setpoint_c")
        start, start_is_date = _moment(entry["start"], path, f"{where}.start", end=False)
        stop, stop_is_date = _moment(entry["end"], path, f"{where}.end", end=True)
        if start_is_date != stop_is_date or (start_is_date and (start[0] is None) != (stop[0] is None)):
            raise InputError("start and end must be given the same way (both \"MM-DD\", both dates, or both "
                             "dates and times)", path=path, column=where)
        if not start_is_date and stop <= start:
            raise InputError("end is not after start", path=path, column=f"{where}.end")
        if start_is_date and start[0] is not None and _dt.date(*stop) < _dt.date(*start):
            raise InputError("end is before start", path=path, column=f"{where}.end")
        out.append((start, stop, sp, start_is_date))
    return out


def _local_naive(index):
    if not isinstance(index, pd.DatetimeIndex):
        raise InputError("a setpoint schedule needs a DatetimeIndex")
    return index.tz_localize(None) if index.tz is not None else index


def _away_mask(index_naive, entry):
    start, stop, _, is_date = entry
    if not is_date:
        return (index_naive >= pd.Timestamp(start)) & (index_naive < pd.Timestamp(stop))
    if start[0] is not None:
        lo = pd.Timestamp(_dt.date(*start))
        hi = pd.Timestamp(_dt.date(*stop)) + pd.Timedelta(days=1)
        return (index_naive >= lo) & (index_naive < hi)
    # Every-year range, which may wrap over the new year ("12-20" to "01-03").
    key = index_naive.month * 100 + index_naive.day
    a, b = start[1] * 100 + start[2], stop[1] * 100 + stop[2]
    return ((key >= a) & (key <= b)) if a <= b else ((key >= a) | (key <= b))


def _day_profiles(index_naive, holidays):
    days = index_naive.normalize()
    profile = np.asarray(days.day_of_week, dtype=np.int64).copy()
    if holidays:
        is_holiday = np.zeros(len(days), dtype=bool)
        for year, month, day in holidays:
            hit = (days.month == month) & (days.day == day)
            if year is not None:
                hit &= days.year == year
            is_holiday |= np.asarray(hit)
        profile[is_holiday] = _HOLIDAY
    return profile


def setpoint_series(schedule, index):
    """
    Setpoint at each stamp of an index, from a schedule or a constant.

    Parameters
    ----------
    schedule : Schedule or float
        The program, or one constant setpoint [°C].
    index : pandas.DatetimeIndex
        Stamps; the program runs on this index's own clock (its time zone). Each value holds
        for the interval that starts at its stamp.

    Returns
    -------
    pandas.Series
        Setpoint [°C], named ``setpoint_c``.

    Notes
    -----
    At time ``t`` on a day the setpoint is that of the latest change point at or before ``t``;
    before the day's first change point the previous day's last setpoint still holds. A
    holiday uses the holiday program; an away range overrides both.
    """
    if not isinstance(schedule, Schedule):
        schedule = Schedule.constant(schedule)
    naive = _local_naive(index)
    n = len(naive)
    if schedule.constant_c is not None:
        values = np.full(n, schedule.constant_c)
    else:
        minutes = np.asarray(naive.hour * 60 + naive.minute + naive.second / 60.0, dtype=float)
        profile = _day_profiles(naive, schedule.holidays)
        previous = _day_profiles(naive - pd.Timedelta(days=1), schedule.holidays)
        values = np.empty(n)
        for p in range(8):
            mins, sps = schedule.profiles[p]
            here = profile == p
            if here.any():
                pos = np.searchsorted(mins, minutes[here], side="right") - 1
                values[here] = np.where(pos >= 0, sps[np.clip(pos, 0, None)], np.nan)
        before_first = np.isnan(values)
        for p in range(8):
            hit = before_first & (previous == p)
            values[hit] = schedule.profiles[p][1][-1]
    for entry in schedule.away:
        values[np.asarray(_away_mask(naive, entry))] = entry[2]
    return pd.Series(values, index=index, name="setpoint_c")


def occupied_mask(schedule, setpoints):
    """
    Which intervals are occupied: setpoint at or above the schedule's occupied level.

    Parameters
    ----------
    schedule : Schedule or float
        The program (its ``occupied_c``: the ``occupied_c`` level, else the highest weekly
        setpoint), or a constant (every interval occupied).
    setpoints : pandas.Series
        From :func:`setpoint_series`. [°C]

    Returns
    -------
    pandas.Series of bool
    """
    if not isinstance(schedule, Schedule) or schedule.constant_c is not None:
        return pd.Series(True, index=setpoints.index, name="occupied")
    return (setpoints >= schedule.occupied_c - 1e-9).rename("occupied")
