"""
Data in: thermostat and logger exports, and weather files, read into SI columns.

Every reader returns ``(data, metadata)`` (as :mod:`pvlib.iotools` does): a DataFrame on a
tz-aware :class:`pandas.DatetimeIndex` labelled at the START of each interval, and a dict that
says where the data came from and which repairs or decisions were made (``notes``).

Cells are never evaluated: numbers go through :func:`pandas.to_numeric`, times through
:func:`pandas.to_datetime` with an explicit format, so a cell such as ``=1+1`` is an unreadable
value with its row number. Row numbers follow :mod:`thermorc.errors` (header = row 1).
File formats and the column-map TOML are described in ``docs/data-formats.md``.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import io
import math
import os
import re
import tomllib
import zoneinfo

import numpy as np
import pandas as pd
import pvlib

from thermorc import units
from thermorc.errors import InputError

__all__ = [
    "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS",
    "LOG_COLUMNS",
    "TEMPERATURE_COLUMNS",
    "INTERVAL_MEAN_COLUMNS",
    "WEATHER_COLUMNS",
    "ColumnMap",
    "load_column_map",
    "read_log",
    "read_weather",
    "cop_at",
]

# Plausible calendar years for a thermostat log or a weather file (common practice: digital
# thermostats and weather archives start well after 1970; 2100 catches typing errors).
YEAR_MIN, YEAR_MAX = 1970, 2100

# A UTC offset ends a cell and follows a digit of the time: 'Z', '+05:00', '-0500'.
_TAIL_OFFSET_RE = r"\d(?:[zZ]|[+-]\d{2}:?\d{2})$"


def check_file(path):
    """Return ``path`` as str after refusing a missing path or a directory."""
    p = os.fspath(path)
    if os.path.isdir(p):
        raise InputError("is a directory (expected a file)", path=p)
    if not os.path.exists(p):
        raise InputError("no such file", path=p)
    return p


def read_text(path, encoding="utf-8"):
    """
    Read a whole text file, refusing empty, binary, UTF-16 or undecodable content.

    Parameters
    ----------
    path : str
        File to read.
    encoding : str
        Expected encoding; 'utf-8' also accepts a UTF-8 byte-order mark.

    Returns
    -------
    str
    """
    with open(path, "rb") as handle:
        data = handle.read()
    if not data.strip():
        raise InputError("file is empty (expected a header row and data rows)", path=path)
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        raise InputError("file is UTF-16 text (expected UTF-8; re-save it as UTF-8 CSV)", path=path)
    if b"\x00" in data[:65536]:
        raise InputError("file looks binary (NUL bytes; expected a UTF-8 text table)", path=path)
    codec = "utf-8-sig" if encoding.lower().replace("_", "-") in ("utf-8", "utf8") else encoding
    try:
        return data.decode(codec)
    except UnicodeDecodeError as exc:
        row = data[: exc.start].count(b"\n") + 1
        raise InputError(
            f"byte 0x{data[exc.start]:02x} cannot be decoded as {encoding} "
            "(expected UTF-8 text; set [file] encoding in the column map for other encodings)",
            path=path,
            row=row,
        ) from None
    except LookupError:
        raise InputError(f"unknown text encoding {encoding!r}", path=path) from None


def csv_frame(text, path, delimiter=",", skip_rows=0):
    """Parse CSV text into a frame of strings; blank lines are kept so row numbers stay true."""
    try:
        frame = pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            dtype=str,
            skiprows=skip_rows,
            skip_blank_lines=False,
            engine="c",
            comment=None,
        )
    except pd.errors.EmptyDataError:
        raise InputError("file is empty (expected a header row and data rows)", path=path) from None
    except pd.errors.ParserError as exc:
        match = re.search(r"line (\d+), saw (\d+)", str(exc))
        expected = re.search(r"Expected (\d+) fields", str(exc))
        if match and expected:
            raise InputError(
                f"{match.group(2)} fields (expected {expected.group(1)}, as in the header)",
                path=path,
                row=int(match.group(1)),  # pandas counts the skipped lines too
            ) from None
        raise InputError(f"cannot parse as CSV ({' '.join(str(exc).split())})", path=path) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def show(value, limit=40):
    """A cell value for an error message: quoted, control characters escaped, shortened."""
    text = repr(str(value))
    return text if len(text) <= limit else text[: limit - 4] + "...'"


def zone(tz, path=None):
    """Validate an IANA time-zone name and return it."""
    if tz is None:
        return None
    if not isinstance(tz, str):
        return tz
    try:
        zoneinfo.ZoneInfo(tz)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        raise InputError(
            f"unknown time zone {tz!r} (expected an IANA name such as America/New_York, or UTC)",
            path=path,
        ) from None
    return tz


def _first(mask):
    idx = np.flatnonzero(np.asarray(mask))
    return int(idx[0]) if idx.size else None


def _year_hint(text):
    match = re.match(r"\s*(\d{4})", str(text))
    if match:
        year = int(match.group(1))
        if year < YEAR_MIN or year > YEAR_MAX:
            return f"year {year} is outside {YEAR_MIN}-{YEAR_MAX}"
    return None


def parse_times(raw, path, column, row0, tz=None, fmt=None, ambiguous="infer", nonexistent="refuse",
                notes=None):
    """
    Parse a column of time cells into a tz-aware DatetimeIndex.

    Parameters
    ----------
    raw : pandas.Series
        Strings, or datetime values (Excel, Parquet).
    path, column : str
        For error messages.
    row0 : int
        File row of ``raw.iloc[0]``.
    tz : str, optional
        IANA zone: required for naive times; aware times are converted to it.
    fmt : str, optional
        strftime format; ISO 8601 when None.
    ambiguous : {'infer', 'earlier', 'later', 'refuse'}
        The repeated hour at the end of daylight saving time: 'infer' reads it in file order
        (first pass daylight time, second pass standard time).
    nonexistent : {'refuse', 'shift_forward'}
        Local times skipped when clocks go forward.
    notes : list, optional
        Receives one line per decision taken.

    Returns
    -------
    pandas.DatetimeIndex
    """
    notes = [] if notes is None else notes
    n = len(raw)
    text_kind = not pd.api.types.is_datetime64_any_dtype(raw.dtype)
    if not text_kind:
        parsed = pd.DatetimeIndex(raw)
        bad = parsed.isna()
        if bad.any():
            i = _first(bad)
            raise InputError("empty time (expected a date and time)", path=path, row=row0 + i, column=column)
        aware = parsed.tz is not None
    else:
        # Binary cells (a Parquet byte-string column) are shown as text, never decoded blindly.
        raw = raw.map(lambda v: repr(v) if isinstance(v, bytes) else v) if raw.dtype == object else raw
        text = raw.astype("string").str.strip()
        empty = text.isna() | (text == "")
        if empty.any():
            i = _first(empty)
            raise InputError("empty time (expected a date and time)", path=path, row=row0 + i, column=column)
        # Offsets sit at the end of a cell; testing each distinct tail once keeps a year of
        # minute data fast (a log has only a few distinct tails ending in an offset).
        codes, tails = pd.factorize(text.str.slice(-7), use_na_sentinel=False)
        if fmt:
            has_off = np.full(n, "%z" in fmt)
        else:
            tail_off = pd.Series(tails, dtype="string").str.contains(_TAIL_OFFSET_RE, regex=True)
            has_off = tail_off.fillna(False).to_numpy(dtype=bool)[codes]
        if has_off.any() and not has_off.all():
            i = _first(has_off != has_off[0])
            kind = "has a UTC offset" if has_off[i] else "has no UTC offset"
            raise InputError(
                f"time {show(text.iloc[i])} {kind}, unlike the first row (expected every time "
                "with an offset, or every time without one plus a time zone)",
                path=path, row=row0 + i, column=column,
            )
        aware = bool(has_off[0])
        try:
            parsed = pd.to_datetime(text, format=fmt or "ISO8601", errors="coerce", utc=aware)
        except (ValueError, OverflowError):
            parsed = pd.to_datetime(pd.Series([_safe_one(t, fmt, aware) for t in text]), utc=aware)
        parsed = pd.DatetimeIndex(parsed)
        bad = parsed.isna()
        if bad.any():
            i = _first(bad)
            hint = _year_hint(text.iloc[i])
            what = hint or f"cannot read time {show(text.iloc[i])}"
            expect = f"format {fmt!r}" if fmt else "ISO 8601 such as 2024-01-15 13:00 or 2024-01-15T13:00-05:00"
            raise InputError(f"{what} (expected {expect})", path=path, row=row0 + i, column=column)
    # A local year lies within a day of the UTC one, so a span that stays a day inside the
    # limits needs no year of each row.
    safe_lo, safe_hi = pd.Timestamp(YEAR_MIN, 1, 2), pd.Timestamp(YEAR_MAX, 12, 31)
    if parsed.tz is not None:
        safe_lo, safe_hi = safe_lo.tz_localize("UTC"), safe_hi.tz_localize("UTC")
    if not (parsed.min() >= safe_lo and parsed.max() < safe_hi):
        years = parsed.year
        bad = (years < YEAR_MIN) | (years > YEAR_MAX)
        if bad.any():
            i = _first(bad)
            raise InputError(
                f"year {years[i]} is outside {YEAR_MIN}-{YEAR_MAX} (expected a real logging date)",
                path=path, row=row0 + i, column=column,
            )
    parsed = parsed.as_unit("ns")
    if aware:
        if tz is not None:
            return parsed.tz_convert(tz)
        if parsed.tz is not None and str(parsed.tz) == "UTC" and text_kind:
            # utc=True above dropped the file's own offsets; keep one fixed offset when they agree.
            uniq = np.unique(_string_offsets_min(pd.Series(tails, dtype="string"))[np.unique(codes)])
            if uniq.size == 1:
                return parsed.tz_convert(_dt.timezone(_dt.timedelta(minutes=int(uniq[0]))))
            notes.append(
                f"times carry {uniq.size} different UTC offsets; they are kept in UTC "
                "(give a time zone to label them in local time)"
            )
        return parsed
    if tz is None:
        raise InputError(
            "times have no UTC offset (expected an offset such as -05:00, or the logger's IANA "
            "time zone via --tz or [time] tz in the column map)",
            path=path, row=row0, column=column,
        )
    return localize(parsed, tz, path, column, row0, ambiguous, nonexistent, notes)


def _safe_one(text, fmt, aware):
    try:
        return pd.to_datetime(text, format=fmt or "ISO8601", utc=aware)
    except (ValueError, OverflowError):
        return pd.NaT


def _string_offsets_min(text):
    parts = text.str.extract(r"(?:([zZ])|([+-])(\d{2}):?(\d{2}))\s*$")
    sign = np.where(parts[1].fillna("+").to_numpy() == "-", -1, 1)
    hours = pd.to_numeric(parts[2], errors="coerce").fillna(0).to_numpy()
    mins = pd.to_numeric(parts[3], errors="coerce").fillna(0).to_numpy()
    return (sign * (hours * 60 + mins)).astype(int)


def localize(naive, tz, path, column, row0, ambiguous="infer", nonexistent="refuse", notes=None):
    """
    Attach an IANA zone to naive local times, deciding the DST changeovers on purpose.

    Parameters
    ----------
    naive : pandas.DatetimeIndex
        Naive local wall-clock times in file order.
    tz : str
        IANA zone.
    path, column, row0 : see :func:`parse_times`.
    ambiguous : {'infer', 'earlier', 'later', 'refuse'}
    nonexistent : {'refuse', 'shift_forward'}
    notes : list, optional

    Returns
    -------
    pandas.DatetimeIndex
    """
    notes = [] if notes is None else notes
    probe = naive.tz_localize(tz, ambiguous="NaT", nonexistent="NaT")
    odd = np.flatnonzero(probe.isna())
    if odd.size == 0:
        _note_spring(naive, tz, notes)
        return probe
    is_gap = np.zeros(odd.size, dtype=bool)
    for k, i in enumerate(odd):
        try:
            pd.DatetimeIndex([naive[i]]).tz_localize(tz, ambiguous=np.array([True]), nonexistent="raise")
        except Exception:  # noqa: BLE001 - pandas raises NonExistentTimeError (a ValueError)
            is_gap[k] = True
    gap_rows = odd[is_gap]
    amb_rows = odd[~is_gap]
    if gap_rows.size and nonexistent != "shift_forward":
        i = int(gap_rows[0])
        raise InputError(
            f"local time {naive[i]:%Y-%m-%d %H:%M} does not exist in {tz} (clocks go forward "
            f"then; {gap_rows.size} such rows; expected none, or set [time] nonexistent = "
            "'shift_forward' if the logger wrote them anyway)",
            path=path, row=row0 + i, column=column,
        )
    dst = np.zeros(len(naive), dtype=bool)
    if amb_rows.size:
        if ambiguous == "refuse":
            i = int(amb_rows[0])
            raise InputError(
                f"local time {naive[i]:%Y-%m-%d %H:%M} occurs twice in {tz} (clocks go back); "
                "expected ambiguous = 'infer', 'earlier' or 'later'",
                path=path, row=row0 + i, column=column,
            )
        if ambiguous == "earlier":
            dst[amb_rows] = True
            notes.append(f"{amb_rows.size} repeated-hour times read as daylight time (ambiguous = 'earlier')")
        elif ambiguous == "later":
            notes.append(f"{amb_rows.size} repeated-hour times read as standard time (ambiguous = 'later')")
        else:
            days = naive[amb_rows].normalize()
            for day in days.unique():
                rows = amb_rows[days == day]
                wall = naive[rows].asi8
                steps_back = np.flatnonzero(np.diff(wall) <= 0)
                if steps_back.size != 1:
                    i = int(rows[0])
                    why = "does not repeat" if steps_back.size == 0 else "goes back more than once"
                    raise InputError(
                        f"the repeated hour on {day:%Y-%m-%d} in {tz} {why} in the file, so the "
                        "file order cannot tell daylight from standard time (expected the hour "
                        "twice in order, or set [time] ambiguous = 'earlier' or 'later')",
                        path=path, row=row0 + i, column=column,
                    )
                cut = steps_back[0] + 1
                dst[rows[:cut]] = True
                notes.append(
                    f"{day:%Y-%m-%d}: the repeated hour in {tz} was read in file order "
                    f"({cut} rows daylight time, then {rows.size - cut} standard time)"
                )
    out = naive.tz_localize(tz, ambiguous=dst, nonexistent="shift_forward")
    if gap_rows.size:
        notes.append(f"{gap_rows.size} non-existent spring-forward times shifted forward (nonexistent = 'shift_forward')")
    _note_spring(naive, tz, notes)
    return out


def _note_spring(naive, tz, notes):
    # Name each spring-forward day in the span: the local hour that does not exist needs no data.
    if len(naive) < 2:
        return
    try:
        start, end = naive.min(), naive.max()
        days = pd.date_range(start.normalize() - pd.Timedelta(days=1), end.normalize(), freq="D")
        if len(days) > 4000:
            return
        offs = pd.DatetimeIndex(days + pd.Timedelta(hours=12)).tz_localize(tz)
        utc_off = (offs.tz_localize(None) - offs.tz_convert("UTC").tz_localize(None)).asi8
        jumps = np.flatnonzero(np.diff(utc_off) > 0)
        for j in jumps:
            notes.append(
                f"{days[j + 1]:%Y-%m-%d}: clocks in {tz} went forward; the skipped local hour "
                "needs no data and is not a gap"
            )
    except Exception:  # noqa: BLE001 - a note only; never fail a read over it
        return


def parse_numbers(raw, path, column, row0, decimal="."):
    """
    Parse a column of cells into floats, refusing text with its row.

    Parameters
    ----------
    raw : pandas.Series
        Strings or numbers; empty cells become NaN.
    path, column : str
    row0 : int
        File row of ``raw.iloc[0]``.
    decimal : str
        Decimal mark ('.' or ',').

    Returns
    -------
    numpy.ndarray of float
    """
    if pd.api.types.is_bool_dtype(raw.dtype):
        raise InputError("holds true/false values (expected numbers)", path=path, column=column)
    if pd.api.types.is_numeric_dtype(raw.dtype):
        values = raw.to_numpy(dtype=float, na_value=np.nan)
        text = None
    else:
        # Binary cells (a Parquet byte-string column) are shown as text, never decoded blindly.
        raw = raw.map(lambda v: repr(v) if isinstance(v, bytes) else v) if raw.dtype == object else raw
        text = raw.astype("string").str.strip()
        cleaned = text.str.replace(",", ".", regex=False) if decimal == "," else text
        values = pd.to_numeric(cleaned, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        bad = np.isnan(values) & ~(text.isna() | (text == "")).to_numpy()
        # to_numeric reads 'nan' and 'NaN' as missing on purpose; other text is an error.
        if bad.any():
            lowered = text.str.lower()
            bad &= ~lowered.isin(["nan", "na", "n/a", "null", "none", "-nan"]).to_numpy()
        if bad.any():
            i = _first(bad)
            raise InputError(
                f"{show(text.iloc[i])} is not a number (expected a decimal number"
                + (" with a decimal comma" if decimal == "," else "") + ")",
                path=path, row=row0 + i, column=column,
            )
    inf = np.isinf(values)
    if inf.any():
        i = _first(inf)
        cell = values[i] if text is None else text.iloc[i]
        raise InputError(f"{show(cell)} is not a finite number", path=path, row=row0 + i, column=column)
    return values


# ---------------------------------------------------------------------------------------------
# The column map
# ---------------------------------------------------------------------------------------------

REQUIRED_COLUMNS = ("indoor_c", "heating_w")
OPTIONAL_COLUMNS = ("outdoor_c", "ghi_w_m2", "setpoint_c", "internal_gains_w")
LOG_COLUMNS = REQUIRED_COLUMNS + OPTIONAL_COLUMNS
TEMPERATURE_COLUMNS = ("indoor_c", "outdoor_c", "setpoint_c")
#: Columns holding a mean over an interval (labelled at its start); the rest are instants.
INTERVAL_MEAN_COLUMNS = ("heating_w", "internal_gains_w", "ghi_w_m2")

# Plausible ranges after conversion to SI (common practice, thermorc's own limits): outdoor
# air within the world's recorded extremes (about -89 degC to +57 degC, WMO archive, from
# memory); a heated or unheated living space; a home's heating plant below 1 MW; global
# horizontal irradiance below about 1.5 times the solar constant (1361 W m-2).
RANGES = {
    "indoor_c": (-30.0, 60.0, "degC"),
    "outdoor_c": (-90.0, 60.0, "degC"),
    "setpoint_c": (0.0, 40.0, "degC"),
    "heating_w": (0.0, 1.0e6, "W"),
    "internal_gains_w": (0.0, 1.0e5, "W"),
    "ghi_w_m2": (-50.0, 2000.0, "W m-2"),
}

_TIME_KEYS = {"column", "format", "tz", "interval", "interval_s", "ambiguous", "nonexistent", "sort",
              "duplicates"}
_FILE_KEYS = {"delimiter", "decimal", "encoding", "skip_rows", "sheet"}
_COLUMN_KEYS = {"column", "unit"}
_STAGE_KEYS = {"name", "column", "unit", "runtime", "rating", "rating_unit", "efficiency", "cop",
               "cop_outdoor_unit"}
_CHOICES = {
    "interval": ("start", "end"),
    "ambiguous": ("infer", "earlier", "later", "refuse"),
    "nonexistent": ("refuse", "shift_forward"),
    "duplicates": ("refuse", "first", "last", "mean"),
}


@dataclasses.dataclass
class ColumnMap:
    """
    How to read one log layout: see ``docs/data-formats.md`` for the TOML form.

    Attributes
    ----------
    time : dict
        ``column`` (default 'time'), ``format``, ``tz``, ``interval`` ('start' or 'end'),
        ``interval_s``, ``ambiguous``, ``nonexistent``, ``sort``, ``duplicates``.
    file : dict
        ``delimiter``, ``decimal``, ``encoding``, ``skip_rows``, ``sheet``.
    columns : dict
        Target column -> {'column': source name, 'unit': unit}.
    heating : list of dict
        Heating stages summed into ``heating_w``.
    source : str or None
        The TOML file it came from.
    """

    time: dict = dataclasses.field(default_factory=dict)
    file: dict = dataclasses.field(default_factory=dict)
    columns: dict = dataclasses.field(default_factory=dict)
    heating: list = dataclasses.field(default_factory=list)
    source: str | None = None


def load_column_map(column_map):
    """
    Read and check a column map.

    Parameters
    ----------
    column_map : None, str, os.PathLike, dict or ColumnMap
        A path to a TOML file, or the same content as a dict.

    Returns
    -------
    ColumnMap
    """
    if column_map is None:
        return ColumnMap()
    if isinstance(column_map, ColumnMap):
        return column_map
    source = None
    if isinstance(column_map, (str, os.PathLike)):
        source = check_file(column_map)
        text = read_text(source)
        try:
            spec = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            match = re.search(r"line (\d+)", str(exc))
            raise InputError(
                f"not valid TOML ({' '.join(str(exc).split())})", path=source,
                row=int(match.group(1)) if match else None,
            ) from None
    elif isinstance(column_map, dict):
        spec = column_map
    else:
        raise InputError(f"column map must be a TOML path or a dict, not {type(column_map).__name__}")

    def bad(message, key):
        return InputError(message, path=source, column=key)

    unknown = set(spec) - {"time", "file", "columns", "heating"}
    if unknown:
        key = sorted(unknown)[0]
        raise bad("unknown section (expected time, file, columns, heating)", key)
    cmap = ColumnMap(source=source)
    for section, keys in (("time", _TIME_KEYS), ("file", _FILE_KEYS)):
        table = spec.get(section, {})
        if not isinstance(table, dict):
            raise bad("must be a table", section)
        for key in table:
            if key not in keys:
                raise bad(f"unknown key (expected one of {', '.join(sorted(keys))})", f"{section}.{key}")
        for key, choices in _CHOICES.items():
            if key in table and table[key] not in choices:
                raise bad(f"{show(table[key])} is not allowed (expected one of {', '.join(choices)})",
                          f"{section}.{key}")
        for key, value in table.items():
            problem = _option_problem(key, value)
            if problem:
                raise bad(f"{show(value)} {problem}", f"{section}.{key}")
        setattr(cmap, section, dict(table))
    if "tz" in cmap.time:
        zone(cmap.time["tz"], source)
    columns = spec.get("columns", {})
    if not isinstance(columns, dict):
        raise bad("must be a table", "columns")
    for target, entry in columns.items():
        if target not in LOG_COLUMNS:
            raise bad(f"unknown target column (expected one of {', '.join(LOG_COLUMNS)})", f"columns.{target}")
        if isinstance(entry, str):
            entry = {"column": entry}
        if not isinstance(entry, dict) or "column" not in entry:
            raise bad("expected a table with 'column' and optional 'unit'", f"columns.{target}")
        for key in entry:
            if key not in _COLUMN_KEYS:
                raise bad("unknown key (expected column, unit)", f"columns.{target}.{key}")
        entry = dict(entry)
        entry["unit"] = _check_unit(target, entry.get("unit"), source, f"columns.{target}.unit")
        cmap.columns[target] = entry
    stages = spec.get("heating", [])
    if isinstance(stages, dict):
        stages = [stages]
    if stages and "heating_w" in cmap.columns:
        raise bad("give heating_w either as a column or as [[heating]] stages, not both", "heating")
    for k, stage in enumerate(stages):
        cmap.heating.append(_check_stage(stage, k, source))
    return cmap


def _option_problem(key, value):
    """What is wrong with the type of a [time] or [file] option, or None."""
    if key in ("column", "format", "tz", "encoding") + tuple(_CHOICES):
        return None if isinstance(value, str) and value else "is not allowed (expected non-empty text)"
    if key in ("delimiter", "decimal"):
        return None if isinstance(value, str) and len(value) == 1 else "is not allowed (expected one character)"
    if key == "skip_rows":
        ok = isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= 1_000_000
        return None if ok else "is not allowed (expected a whole number of rows >= 0)"
    if key == "interval_s":
        ok = isinstance(value, (int, float)) and not isinstance(value, bool) and 0 < value <= 86400
        return None if ok else "is not allowed (expected seconds, 0 < interval_s <= 86400)"
    if key == "sort":
        return None if isinstance(value, bool) else "is not allowed (expected true or false)"
    if key == "sheet":
        ok = (isinstance(value, str) and value) or (isinstance(value, int) and not isinstance(value, bool)
                                                     and value >= 0)
        return None if ok else "is not allowed (expected a sheet name or a 0-based sheet number)"
    return None


def _check_unit(target, unit, source, key):
    if target in TEMPERATURE_COLUMNS:
        allowed, default = units.TEMPERATURE_UNITS, "degC"
    elif target == "ghi_w_m2":
        allowed, default = ("W/m2",), "W/m2"
        if unit in ("W m-2", "W/m^2", "Wm-2"):
            unit = "W/m2"
    else:
        allowed, default = tuple(units.POWER_UNITS), "W"
    if unit is None:
        return default
    canon = units.canonical_unit(unit, allowed)
    if canon is None:
        raise InputError(f"unknown unit {show(unit)} (expected one of {', '.join(allowed)})", path=source, column=key)
    return canon


def _check_stage(stage, k, source):
    where = f"heating[{k}]"
    if not isinstance(stage, dict) or "column" not in stage:
        raise InputError("a heating stage needs 'column'", path=source, column=where)
    for key in stage:
        if key not in _STAGE_KEYS:
            raise InputError(f"unknown key (expected one of {', '.join(sorted(_STAGE_KEYS))})",
                             path=source, column=f"{where}.{key}")
    stage = dict(stage)
    stage.setdefault("name", f"stage {k + 1}")
    if "runtime" in stage:
        canon = units.canonical_unit(stage["runtime"], units.RUNTIME_UNITS)
        if canon is None:
            raise InputError(f"unknown runtime unit {show(stage['runtime'])} (expected one of "
                             f"{', '.join(units.RUNTIME_UNITS)})", path=source, column=f"{where}.runtime")
        stage["runtime"] = canon
        if "rating" not in stage:
            raise InputError("a runtime stage needs 'rating' (its power when running)", path=source,
                             column=f"{where}.rating")
        stage["rating_unit"] = _check_unit("heating_w", stage.get("rating_unit", "W"), source,
                                           f"{where}.rating_unit")
        rating = stage["rating"]
        if isinstance(rating, int) and abs(rating) > 1e300:  # a TOML integer beyond the float range
            rating = math.inf
        if not isinstance(rating, (int, float)) or not math.isfinite(rating) or rating <= 0:
            raise InputError(f"{show(rating)} is not a positive number", path=source, column=f"{where}.rating")
    else:
        stage["unit"] = _check_unit("heating_w", stage.get("unit", "W"), source, f"{where}.unit")
    if "efficiency" in stage and "cop" in stage:
        raise InputError("give either 'efficiency' or 'cop', not both", path=source, column=where)
    eff = stage.get("efficiency", 1.0)
    if not isinstance(eff, (int, float)) or not (0 < eff <= 1.5):
        raise InputError(f"{show(eff)} is not a plausible efficiency (expected 0 < efficiency <= 1.5)",
                         path=source, column=f"{where}.efficiency")
    stage["efficiency"] = float(eff)
    if "cop" in stage:
        stage["cop"] = _check_cop(stage["cop"], stage.get("cop_outdoor_unit", "degC"), source, f"{where}.cop")
    return stage


def _check_cop(table, unit, source, where):
    if isinstance(table, (int, float)):
        table = [[0.0, float(table)]]
    try:
        arr = np.array(table, dtype=float)
    except (TypeError, ValueError, OverflowError):
        arr = np.empty((0, 0))
    if arr.ndim != 2 or arr.shape[1] != 2 or arr.shape[0] < 1 or not np.isfinite(arr).all():
        raise InputError("expected a COP number or a list of [outdoor temperature, COP] pairs",
                         path=source, column=where)
    canon = units.canonical_unit(unit, units.TEMPERATURE_UNITS)
    if canon is None:
        raise InputError(f"unknown unit {show(unit)}", path=source, column=where + "_outdoor_unit")
    arr[:, 0] = units.to_celsius(arr[:, 0], canon)
    arr = arr[np.argsort(arr[:, 0])]
    if np.any(np.diff(arr[:, 0]) <= 0):
        raise InputError("outdoor temperatures in the COP table must differ", path=source, column=where)
    if np.any(arr[:, 1] <= 0) or np.any(arr[:, 1] > 10):
        raise InputError("COP values must lie in (0, 10]", path=source, column=where)
    return arr


def cop_at(table, outdoor_c):
    """
    Coefficient of performance at an outdoor temperature, from a [T, COP] table.

    Linear between table points, held constant beyond the ends (common practice for
    manufacturer performance tables).

    Parameters
    ----------
    table : numpy.ndarray, shape (n, 2)
        Outdoor temperature [°C] and COP [-], sorted by temperature.
    outdoor_c : array_like
        Outdoor temperature [°C].

    Returns
    -------
    numpy.ndarray
        COP [-]; NaN where ``outdoor_c`` is NaN.
    """
    out = np.interp(np.asarray(outdoor_c, dtype=float), table[:, 0], table[:, 1])
    return np.where(np.isnan(outdoor_c), np.nan, out)


# ---------------------------------------------------------------------------------------------
# Logs
# ---------------------------------------------------------------------------------------------

def _table_from_file(path, cmap):
    """The raw table as read (strings or typed cells), its format, and the file row of record 0."""
    ext = os.path.splitext(path)[1].lower()
    skip = int(cmap.file.get("skip_rows", 0))
    if ext in (".parquet", ".pq"):
        with open(path, "rb") as handle:
            head = handle.read(4)
        if head != b"PAR1":
            raise InputError("is not a Parquet file (expected the PAR1 signature)", path=path)
        try:
            frame = pd.read_parquet(path)
        except Exception as exc:  # noqa: BLE001 - pyarrow raises many types for damaged files
            raise InputError(f"cannot read Parquet ({type(exc).__name__})", path=path) from None
        return _parquet_frame(frame)
    if ext in (".xlsx", ".xlsm"):
        if os.path.getsize(path) == 0:
            raise InputError("file is empty (expected a workbook)", path=path)
        try:
            frame = pd.read_excel(path, sheet_name=cmap.file.get("sheet", 0), header=skip, dtype=object,
                                  engine="openpyxl")
        except Exception as exc:  # noqa: BLE001 - openpyxl raises many types for damaged files
            raise InputError(f"cannot read as an Excel workbook ({type(exc).__name__})", path=path) from None
        frame.columns = [str(c).strip() for c in frame.columns]
        return frame, "excel", skip + 2
    text = read_text(path, cmap.file.get("encoding", "utf-8"))
    frame = csv_frame(text, path, cmap.file.get("delimiter", ","), skip)
    return frame, "csv", skip + 2


def _parquet_frame(frame):
    """A table read from Parquet, its format and the row of record 0 (a time index becomes ``time``)."""
    if isinstance(frame.index, pd.DatetimeIndex) and "time" not in frame.columns:
        frame = frame.reset_index(names="time")
    return frame, "parquet", 2


def read_log(path, column_map=None, tz=None, interval=None, *, sort=None, duplicates=None,
             ambiguous=None, nonexistent=None, table=None):
    """
    Read a thermostat or data-logger export into SI columns on a tz-aware index.

    Parameters
    ----------
    path : str or os.PathLike
        CSV (any extension but the ones below), Parquet (``.parquet``, ``.pq``) or Excel
        (``.xlsx``, ``.xlsm``).
    column_map : str, os.PathLike, dict or ColumnMap, optional
        How to find and convert the columns (``docs/data-formats.md``). Without it the file
        must use the canonical names: time, indoor_c, heating_w and optional outdoor_c,
        ghi_w_m2, setpoint_c, internal_gains_w.
    tz : str, optional
        IANA time zone: needed when the times carry no UTC offset; times with an offset are
        converted to it. Overrides ``[time] tz`` of the map.
    interval : {'start', 'end'}, optional
        Whether a power value in the file is the mean over the interval starting or ending at
        its stamp (default: the map's ``[time] interval``, else 'start'). The output is always
        labelled at the interval start.
    sort : bool, optional
        Sort rows that are out of time order instead of refusing them.
    duplicates : {'refuse', 'first', 'last', 'mean'}, optional
        What to do with rows that repeat a time with different values. Exact repeats are
        always dropped (and counted in the notes).
    ambiguous : {'infer', 'earlier', 'later', 'refuse'}, optional
        The repeated autumn hour of naive local times (default 'infer': file order).
    nonexistent : {'refuse', 'shift_forward'}, optional
        Local times in the skipped spring hour (default 'refuse').
    table : pandas.DataFrame, optional
        The log's cells already read, as :func:`pandas.read_parquet` gives them (the rows of
        one home of a Parquet dataset, say). ``path`` is then not opened: it names the log in
        messages and metadata, and rows are counted as in a Parquet file (record 0 = row 2).

    Returns
    -------
    data : pandas.DataFrame
        Index 'time' (tz-aware, increasing, unique, interval-start labels); columns
        indoor_c [°C], heating_w [W] and whichever of outdoor_c [°C], ghi_w_m2 [W m-2],
        setpoint_c [°C], internal_gains_w [W] the file has. Temperatures are instants,
        powers are interval means.
    metadata : dict
        path, source_format, rows, tz, interval ('start'), source columns and units,
        median_step_s, heating stages and ``notes`` (one line per repair or decision).

    Raises
    ------
    thermorc.errors.InputError
        With the file, row and column of the first problem found.
    """
    path = check_file(path) if table is None else os.fspath(path)
    cmap = load_column_map(column_map)
    t_opt = dict(cmap.time)
    tz = zone(tz if tz is not None else t_opt.get("tz"), path)
    interval = interval or t_opt.get("interval", "start")
    if interval not in ("start", "end"):
        raise InputError(f"interval {show(interval)} is not allowed (expected start or end)", path=path)
    sort = bool(t_opt.get("sort", False)) if sort is None else bool(sort)
    duplicates = duplicates or t_opt.get("duplicates", "refuse")
    ambiguous = ambiguous or t_opt.get("ambiguous", "infer")
    nonexistent = nonexistent or t_opt.get("nonexistent", "refuse")
    notes = []

    raw, fmt_name, row0 = _table_from_file(path, cmap) if table is None else _parquet_frame(table)
    # Blank lines were kept so row numbers match the file; they carry nothing.
    blank = raw.isna().all(axis=1).to_numpy()
    rows = np.arange(len(raw)) + row0
    if blank.any():
        raw = raw.loc[~blank].reset_index(drop=True)
        rows = rows[~blank]
        notes.append(f"{int(blank.sum())} blank lines skipped")
    if len(raw) == 0:
        raise InputError("has a header but no data rows", path=path, row=row0 - 1)

    time_col = t_opt.get("column", "time")
    sources = {}
    for target in LOG_COLUMNS:
        if target in cmap.columns:
            sources[target] = cmap.columns[target]
        elif target in raw.columns and not (target == "heating_w" and cmap.heating):
            sources[target] = {"column": target, "unit": _check_unit(target, None, None, target)}
    needed = [time_col] + [s["column"] for s in sources.values()] + [s["column"] for s in cmap.heating]
    for target in REQUIRED_COLUMNS:
        if target not in sources and not (target == "heating_w" and cmap.heating):
            needed.append(target)
    missing = [c for c in needed if c not in raw.columns]
    if missing:
        found = ", ".join(show(c, 30) for c in list(raw.columns)[:12])
        raise InputError(
            f"missing required column (expected {', '.join(dict.fromkeys(needed))}; found {found})",
            path=path, row=1 if fmt_name == "csv" else None, column=missing[0],
        )

    index = _parse_time_rows(raw[time_col], rows, path, time_col, tz, t_opt.get("format"), ambiguous,
                             nonexistent, notes)

    values = {}
    for target, src in sources.items():
        values[target] = _parse_rows(raw[src["column"]], rows, path, src["column"], cmap.file.get("decimal", "."))
    stage_values = [
        _parse_rows(raw[s["column"]], rows, path, s["column"], cmap.file.get("decimal", ".")) for s in cmap.heating
    ]

    # Order and duplicates, before any unit work, so row numbers still point at the file.
    order_ns = index.asi8
    back = np.flatnonzero(np.diff(order_ns) < 0)
    if back.size:
        if not sort:
            i = int(back[0]) + 1
            raise InputError(
                f"time {index[i].isoformat()} is earlier than the row above (expected times in "
                "increasing order; pass sort=True or set [time] sort = true to sort them)",
                path=path, row=int(rows[i]), column=time_col,
            )
        perm = np.argsort(order_ns, kind="stable")
        index, rows = index[perm], rows[perm]
        values = {k: v[perm] for k, v in values.items()}
        stage_values = [v[perm] for v in stage_values]
        notes.append(f"{back.size} rows out of time order were sorted")
    index, rows, values, stage_values = _dedupe(index, rows, values, stage_values, path, time_col,
                                                sources, cmap, duplicates, notes)
    if len(index) < 3:
        raise InputError(f"only {len(index)} distinct times (expected at least 3 rows of data)", path=path)

    steps = np.diff(index.asi8) / 1e9
    median_step_s = float(np.median(steps))

    # Units to SI, and physical checks with the file row of the first offender.
    for target, src in sources.items():
        values[target] = _to_si(target, values[target], src, rows, path)
    if cmap.heating:
        values["heating_w"] = _stages_to_heat(cmap.heating, stage_values, values, rows, path, t_opt,
                                              median_step_s, interval, notes)
        sources["heating_w"] = {"column": " + ".join(s["column"] for s in cmap.heating), "unit": "W"}

    for target in sources:
        v = values[target]
        if np.isnan(v).all():
            raise InputError("has no values (every cell is empty)", path=path, column=sources[target]["column"])
        _check_range(target, v, rows, path, sources[target]["column"])
    ok = ~np.isnan(values["indoor_c"]) & ~np.isnan(values["heating_w"])
    if ok.sum() < 3:
        raise InputError(f"only {int(ok.sum())} rows have both indoor_c and heating_w (expected at least 3)",
                         path=path)

    names = [k for k in LOG_COLUMNS if k in values]
    if all(values[k].dtype == np.float64 for k in names):
        # One block laid out as pandas lays out a dict of float columns, built in one step.
        data = pd.DataFrame(np.vstack([values[k] for k in names]).T, index=index, columns=pd.Index(names), copy=False)
    else:
        data = pd.DataFrame({k: values[k] for k in names}, index=index)
    data.index.name = "time"
    if interval == "end":
        for col in INTERVAL_MEAN_COLUMNS:
            if col in data:
                data[col] = data[col].shift(-1)
        notes.append("interval-ending power values relabelled to the start of their interval")
    extra = [c for c in raw.columns if c not in needed and not str(c).startswith("Unnamed")]
    if extra:
        notes.append("columns not used: " + ", ".join(show(c, 30) for c in extra[:10]))
    meta = {
        "path": path,
        "source_format": fmt_name,
        "rows": int(len(data)),
        "tz": str(data.index.tz),
        "interval": "start",
        "source_interval": interval,
        "columns": {k: {"column": v["column"], "unit": v.get("unit")} for k, v in sources.items()},
        "heating_stages": [{k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in s.items()}
                           for s in cmap.heating],
        "median_step_s": median_step_s,
        "column_map": cmap.source,
        "notes": notes,
    }
    return data, meta


def _parse_time_rows(raw, rows, path, column, tz, fmt, ambiguous, nonexistent, notes):
    try:
        return parse_times(_positional(raw), path, column, 0, tz=tz, fmt=fmt, ambiguous=ambiguous,
                           nonexistent=nonexistent, notes=notes)
    except InputError as exc:
        raise _relocate(exc, rows) from None


def _parse_rows(raw, rows, path, column, decimal):
    try:
        return parse_numbers(_positional(raw), path, column, 0, decimal=decimal)
    except InputError as exc:
        raise _relocate(exc, rows) from None


def _positional(raw):
    """``raw`` on the index 0, 1, ... (the parsers count rows from 0)."""
    index = raw.index
    if isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1:
        return raw
    return raw.reset_index(drop=True)


def _relocate(exc, rows):
    # The parsers count from 0; map back to the file's own row numbers.
    row = None if exc.row is None else int(rows[exc.row])
    return InputError(exc.message, path=exc.path, row=row, column=exc.column)


def _dedupe(index, rows, values, stage_values, path, time_col, sources, cmap, policy, notes):
    dup = index.duplicated(keep=False)
    if not dup.any():
        return index, rows, values, stage_values
    table = np.column_stack([values[k] for k in values] + stage_values) if (values or stage_values) \
        else np.zeros((len(index), 0))
    names = [sources[k]["column"] for k in values] + [s["column"] for s in cmap.heating]
    frame = pd.DataFrame(table, index=index)
    exact = frame.reset_index().duplicated(keep="first").to_numpy()
    keep = ~exact
    n_exact = int(exact.sum())
    if n_exact:
        notes.append(f"{n_exact} rows that repeat an earlier row exactly were dropped")
    index, rows, table = index[keep], rows[keep], table[keep]
    conflict = index.duplicated(keep=False)
    if conflict.any():
        first = int(np.flatnonzero(index.duplicated(keep="first"))[0])
        prev = int(np.flatnonzero(index == index[first])[0])
        if policy == "refuse":
            diff_col = next((j for j in range(table.shape[1])
                             if not (table[first, j] == table[prev, j]
                                     or (np.isnan(table[first, j]) and np.isnan(table[prev, j])))), 0)
            raise InputError(
                f"time {index[first].isoformat()} repeats row {int(rows[prev])} with a different "
                f"value in {show(names[diff_col] if names else '?')} ({table[prev, diff_col]:g} vs "
                f"{table[first, diff_col]:g}); expected one row per time, or duplicates = 'first', "
                "'last' or 'mean'",
                path=path, row=int(rows[first]), column=time_col,
            )
        frame = pd.DataFrame(table, index=index)
        grouped = frame.groupby(level=0, sort=False)
        merged = {"first": grouped.first, "last": grouped.last, "mean": grouped.mean}[policy]()
        row_frame = pd.Series(rows, index=index).groupby(level=0, sort=False).first()
        notes.append(f"{int(conflict.sum())} rows sharing a time were merged (duplicates = '{policy}')")
        index = pd.DatetimeIndex(merged.index)
        rows = row_frame.to_numpy()
        table = merged.to_numpy()
    nv = len(values)
    values = {k: table[:, j] for j, k in enumerate(values)}
    stage_values = [table[:, nv + j] for j in range(len(stage_values))]
    return index, rows, values, stage_values


def _to_si(target, v, src, rows, path):
    unit = src["unit"]
    if target in TEMPERATURE_COLUMNS:
        if target == "indoor_c" and unit == "degC":
            med = np.nanmedian(v)
            # No lived-in room has a median above 40 degC, while 50-95 is the usual degF range.
            if 40.0 < med < 110.0:
                i = int(np.flatnonzero(v > 40.0)[0])
                raise InputError(
                    f"values look like degF, not degC (median {med:.1f}); declare unit = 'degF' "
                    f"for indoor_c in the column map (expected degC between {RANGES[target][0]:g} and "
                    f"{RANGES[target][1]:g})",
                    path=path, row=int(rows[i]), column=src["column"],
                )
        return units.to_celsius(v, unit)
    if target == "ghi_w_m2":
        return v
    return v * units.power_factor_w(unit)


def _check_range(target, v, rows, path, column):
    lo, hi, unit = RANGES[target]
    with np.errstate(invalid="ignore"):
        out = (v < lo) | (v > hi)
    if out.any():
        i = int(np.flatnonzero(out)[0])
        if target == "heating_w" and v[i] < 0:
            what = f"{v[i]:g} W is negative (expected heat delivered, W >= 0)"
        else:
            what = f"{v[i]:.6g} {unit} is outside the plausible range (expected {lo:g} to {hi:g} {unit})"
        raise InputError(what, path=path, row=int(rows[i]), column=column)


def _stages_to_heat(stages, stage_values, values, rows, path, t_opt, median_step_s, interval, notes):
    interval_s = float(t_opt.get("interval_s", median_step_s))
    total = np.zeros(len(rows))
    outdoor = values.get("outdoor_c")
    for stage, raw in zip(stages, stage_values):
        col = stage["column"]
        with np.errstate(invalid="ignore"):
            neg = raw < 0
        if neg.any():
            i = int(np.flatnonzero(neg)[0])
            raise InputError(f"{raw[i]:g} is negative (expected runtime or power >= 0)", path=path,
                             row=int(rows[i]), column=col)
        if "runtime" in stage:
            frac = units.runtime_to_fraction(raw, stage["runtime"], interval_s)
            with np.errstate(invalid="ignore"):
                over = frac > 1.05
            if over.any():
                i = int(np.flatnonzero(over)[0])
                raise InputError(
                    f"runtime {raw[i]:g} {stage['runtime']} is longer than the {interval_s:g} s interval "
                    "(expected at most the interval; set [time] interval_s if the logging interval differs)",
                    path=path, row=int(rows[i]), column=col,
                )
            base = np.clip(frac, 0.0, 1.0) * float(stage["rating"]) * units.power_factor_w(stage["rating_unit"])
        else:
            base = raw * units.power_factor_w(stage["unit"])
        if "cop" in stage:
            if outdoor is None:
                raise InputError("a COP table needs the outdoor temperature (map outdoor_c)", path=path,
                                 column=col)
            heat = base * cop_at(stage["cop"], outdoor)
        else:
            heat = base * stage["efficiency"]
        total = total + heat
    notes.append(f"heating_w is the sum of {len(stages)} stage(s): " + ", ".join(s["name"] for s in stages))
    return total


# ---------------------------------------------------------------------------------------------
# Weather
# ---------------------------------------------------------------------------------------------

WEATHER_COLUMNS = ("outdoor_c", "ghi_w_m2", "dni_w_m2", "dhi_w_m2", "wind_m_s")
#: Default year for typical-year files (not a leap year, so 8760 hours fit).
TYPICAL_YEAR = 1990


def _sniff_weather(path):
    ext = os.path.splitext(path)[1].lower()
    with open(path, "rb") as handle:
        head = handle.read(4096)
    if ext == ".epw" or head.startswith(b"LOCATION,"):
        return "epw"
    lines = head.splitlines()
    if len(lines) > 1 and lines[1].startswith(b"Date (MM/DD/YYYY)"):
        return "tmy3"
    return "csv"


def read_weather(path, tz=None, coerce_year=None):
    """
    Read a TMY3, EPW or canonical weather CSV into interval-start labelled SI columns.

    TMY3 and EPW go through :func:`pvlib.iotools.read_tmy3` and :func:`pvlib.iotools.read_epw`.
    Both files describe each hour by the stamp at its end: irradiance is the energy of the
    hour before the stamp, temperature and wind are readings at the stamp. On output,
    irradiance is labelled at the start of its hour (one hour earlier) and instant values
    keep their instant; the typical year wraps, so the reading at 24:00 on 31 December is the
    00:00 reading of 1 January of the same (coerced) year.

    Parameters
    ----------
    path : str or os.PathLike
        The weather file.
    tz : str, optional
        IANA zone to convert the index to (files are read in their own fixed standard-time
        offset; a CSV with naive times needs it).
    coerce_year : int, optional
        Put every row in this year. Typical-year files whose months come from different years
        are coerced to 1990 when this is None, and the notes say so.

    Returns
    -------
    data : pandas.DataFrame
        outdoor_c [°C] and wind_m_s [m s-1] at instants; ghi_w_m2, dni_w_m2, dhi_w_m2
        [W m-2] as hourly means over the interval starting at the stamp.
    metadata : dict
        latitude, longitude [deg], altitude_m, tz, source_format ('tmy3', 'epw', 'csv'),
        name, notes.

    References
    ----------
    Wilcox, S. and Marion, W. (2008), "Users Manual for TMY3 Data Sets", NREL/TP-581-43156
    (hour-ending stamps). EnergyPlus "Auxiliary Programs", weather file format (hour 1 is
    the hour ending 01:00).
    """
    path = check_file(path)
    if os.path.getsize(path) == 0:
        raise InputError("file is empty (expected a weather file)", path=path)
    read_text(path, "latin-1" if _sniff_weather(path) != "csv" else "utf-8")
    kind = _sniff_weather(path)
    tz = zone(tz, path)
    if kind == "csv":
        return _read_weather_csv(path, tz, coerce_year)
    notes = []
    try:
        if kind == "tmy3":
            raw, meta = pvlib.iotools.read_tmy3(path, coerce_year=None, map_variables=True)
        else:
            raw, meta = pvlib.iotools.read_epw(path, coerce_year=None)
    except Exception as exc:  # noqa: BLE001 - the pvlib readers raise many types on bad files
        # pandas quotes a bad date cell but not its row: find the first line that starts with it.
        cell = re.search(r'time data "([^"]*)"', str(exc))
        row = None
        if cell:
            with open(path, encoding="latin-1") as handle:
                row = next((i + 1 for i, line in enumerate(handle) if line.startswith(cell.group(1) + ",")), None)
        raise InputError(f"cannot read as {kind.upper()} ({type(exc).__name__}: "
                         f"{' '.join(str(exc).split())[:120]})", path=path, row=row) from None
    n = len(raw)
    if n not in (8760, 8784):
        raise InputError(f"has {n} hourly rows (expected 8760 for a typical year)", path=path)
    # File line of data row k: TMY3 has 2 header lines, EPW 8 (the formats' manuals).
    first_row = 3 if kind == "tmy3" else 9
    if kind == "tmy3":
        # The file's own date column names the day each hour (01:00 ... 24:00) belongs to.
        dates = pd.to_datetime(raw["Date (MM/DD/YYYY)"], format="%m/%d/%Y", errors="coerce")
        if dates.isna().any():
            i = int(np.flatnonzero(dates.isna().to_numpy())[0])
            raise InputError(f"{show(raw['Date (MM/DD/YYYY)'].iloc[i])} is not a date (expected MM/DD/YYYY)",
                             path=path, row=first_row + i, column="Date (MM/DD/YYYY)")
        years, months, days = (dates.dt.year.to_numpy(), dates.dt.month.to_numpy(), dates.dt.day.to_numpy())
    else:
        years, months, days = raw["year"].to_numpy(), raw["month"].to_numpy(), raw["day"].to_numpy()
    limits = {"temp_air": (-90.0, 60.0), "ghi": (-50.0, 2000.0), "dni": (-50.0, 1500.0), "dhi": (-50.0, 1000.0),
              "wind_speed": (0.0, 120.0)}
    for src, (lo, hi) in limits.items():
        v = pd.to_numeric(raw[src], errors="coerce").to_numpy(dtype=float)
        bad_cell = np.isnan(v) & raw[src].notna().to_numpy()
        with np.errstate(invalid="ignore"):
            bad_cell |= (v < lo) | (v > hi)
        if bad_cell.any():
            i = int(np.flatnonzero(bad_cell)[0])
            raise InputError(f"{show(raw[src].iloc[i])} is not a number in the plausible range (expected {lo:g} "
                             f"to {hi:g})", path=path, row=first_row + i, column=src)
        raw[src] = v
    uniq_years = sorted(set(int(y) for y in years))
    year = coerce_year
    if year is None:
        year = TYPICAL_YEAR if len(uniq_years) > 1 else uniq_years[0]
        if len(uniq_years) > 1:
            notes.append(
                f"typical-year months from several years ({uniq_years[0]}-{uniq_years[-1]}) "
                f"coerced to {year}"
            )
    else:
        notes.append(f"rows coerced to the year {year}")
    try:
        offset = _dt.timezone(_dt.timedelta(hours=float(meta["TZ"])))
        float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0))
    except (TypeError, ValueError, KeyError, OverflowError):
        raise InputError("header has no valid time zone, latitude, longitude or altitude (expected numbers)",
                         path=path, row=1) from None
    start = pd.Timestamp(year=int(year), month=1, day=1, tz=offset)
    index = pd.date_range(start, periods=n, freq="h", name="time", unit="ns")
    if not ((months == index.month) & (days == index.day)).all():
        raise InputError(f"rows do not form one continuous year (expected {n} consecutive hours "
                         f"in a {'leap' if n == 8784 else 'common'} year; check coerce_year)", path=path)
    temp_col = "temp_air"
    wind_col = "wind_speed"
    data = pd.DataFrame(index=index)
    # Instants: the reading stamped at the end of row k-1's hour is the instant at the start of
    # row k's hour; row 0 takes the last row's 24:00 reading (the typical year wraps).
    data["outdoor_c"] = np.roll(raw[temp_col].to_numpy(dtype=float), 1)
    for src, dst in (("ghi", "ghi_w_m2"), ("dni", "dni_w_m2"), ("dhi", "dhi_w_m2")):
        data[dst] = raw[src].to_numpy(dtype=float)  # Wh m-2 over one hour = mean W m-2
    data["wind_m_s"] = np.roll(raw[wind_col].to_numpy(dtype=float), 1)
    notes.append("hour-ending stamps converted: irradiance labelled at the start of its hour, "
                 "temperature and wind kept at their instant (the 24:00 reading of the last day "
                 "wraps to 00:00 of the first)")
    if tz is not None:
        data.index = data.index.tz_convert(tz)
    for col in ("outdoor_c", "ghi_w_m2"):
        if data[col].isna().all():
            raise InputError("has no values", path=path, column=col)
    name = meta.get("Name") if kind == "tmy3" else meta.get("city")
    metadata = {
        "path": path,
        "source_format": kind,
        "name": str(name).strip('"') if name is not None else None,
        "latitude": float(meta["latitude"]),
        "longitude": float(meta["longitude"]),
        "altitude_m": float(meta.get("altitude", 0.0)),
        "tz": str(data.index.tz),
        "utc_offset_h": float(meta["TZ"]),
        "source_years": uniq_years,
        "year": int(year),
        "notes": notes,
    }
    return data, metadata


_WEATHER_META_KEYS = {"latitude": float, "longitude": float, "altitude_m": float, "name": str}


def _read_weather_csv(path, tz, coerce_year):
    text = read_text(path)
    lines = text.splitlines()
    meta = {"latitude": None, "longitude": None, "altitude_m": 0.0, "name": None}
    meta_rows = {}
    skip = 0
    for line in lines:
        if not line.startswith("#"):
            break
        skip += 1
        key, sep, value = line[1:].partition("=")
        key = key.strip()
        if sep and key in _WEATHER_META_KEYS:
            try:
                meta[key] = _WEATHER_META_KEYS[key](value.strip())
            except ValueError:
                raise InputError(f"{show(value.strip())} is not a number", path=path, row=skip,
                                 column=key) from None
            meta_rows[key] = skip
    for key, (lo, hi) in {"latitude": (-90.0, 90.0), "longitude": (-180.0, 180.0), "altitude_m": (-500.0, 9000.0)}.items():
        value = meta[key]
        if value is not None and not (math.isfinite(value) and lo <= value <= hi):
            raise InputError(f"{value:g} is outside {lo:g} to {hi:g} (expected the site's {key})", path=path,
                             row=meta_rows.get(key), column=key)
    frame = csv_frame(text, path, ",", skip)
    row0 = skip + 2
    blank = frame.isna().all(axis=1).to_numpy()
    rows = np.arange(len(frame)) + row0
    frame, rows = frame.loc[~blank].reset_index(drop=True), rows[~blank]
    if len(frame) == 0:
        raise InputError("has a header but no data rows", path=path, row=row0 - 1)
    for col in ("time", "outdoor_c", "ghi_w_m2"):
        if col not in frame.columns:
            raise InputError(
                "missing required column (expected time, outdoor_c, ghi_w_m2 and optional "
                f"dni_w_m2, dhi_w_m2, wind_m_s; found {', '.join(show(c, 30) for c in frame.columns[:10])})",
                path=path, row=row0 - 1, column=col,
            )
    notes = []
    index = _parse_time_rows(frame["time"], rows, path, "time", tz, None, "infer", "refuse", notes)
    if np.any(np.diff(index.asi8) <= 0):
        i = int(np.flatnonzero(np.diff(index.asi8) <= 0)[0]) + 1
        raise InputError("time is not later than the row above (expected increasing, unique times)",
                         path=path, row=int(rows[i]), column="time")
    data = pd.DataFrame(index=index)
    data.index.name = "time"
    limits = {"outdoor_c": (-90.0, 60.0), "ghi_w_m2": (-50.0, 2000.0), "dni_w_m2": (-50.0, 1500.0),
              "dhi_w_m2": (-50.0, 1000.0), "wind_m_s": (0.0, 120.0)}
    for col in WEATHER_COLUMNS:
        if col not in frame.columns:
            continue
        v = _parse_rows(frame[col], rows, path, col, ".")
        lo, hi = limits[col]
        with np.errstate(invalid="ignore"):
            out = (v < lo) | (v > hi)
        if out.any():
            i = int(np.flatnonzero(out)[0])
            raise InputError(f"{v[i]:.6g} is outside the plausible range (expected {lo:g} to {hi:g})",
                             path=path, row=int(rows[i]), column=col)
        if np.isnan(v).all():
            raise InputError("has no values (every cell is empty)", path=path, column=col)
        data[col] = v
    if coerce_year is not None:
        leap_day = (data.index.month == 2) & (data.index.day == 29)
        if leap_day.any() and not pd.Timestamp(year=int(coerce_year), month=1, day=1).is_leap_year:
            i = int(np.flatnonzero(leap_day)[0])
            raise InputError(f"29 February cannot be moved to {coerce_year}, a common year (expected a weather file "
                             "without a leap day, or its own dates)", path=path, row=int(rows[i]), column="time")
        data.index = pd.DatetimeIndex([t.replace(year=int(coerce_year)) for t in data.index], name="time")
        notes.append(f"rows coerced to the year {coerce_year}")
    meta.update({"path": path, "source_format": "csv", "tz": str(data.index.tz), "notes": notes})
    return data, meta
