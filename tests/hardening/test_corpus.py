"""
Hostile and malformed inputs for every command that reads a file.

Each case must end with exit code 2 and exactly one stderr line, "thermorc: error: FILE, row N,
column 'x': ..." (the contract of thermorc.errors and the CLI), with no traceback, no new or
half-written file in the output folder and an existing output left byte for byte as it was
(write to a temporary file, then os.replace: common practice). The formula-injection cases
check that text reaching a CSV output comes out escaped (OWASP, "CSV Injection",
https://owasp.org/www-community/attacks/CSV_Injection).

The corpus is generated here, not stored, to keep the repository small.
"""

from __future__ import annotations

import csv
import io
import json
import pathlib

import pytest

from tests.hardening.conftest import (
    DATA, EXAMPLES, GOOD_LOG, GOOD_WEATHER, TMY3, assert_one_line_error, runner, snapshot, write_good_result,
)
from thermorc.cli import app

DIR = object()  # the hostile "file" is a folder
MISSING = object()  # the hostile "file" does not exist

# File-level problems: there is no row or column to name, the file itself is the place.
GENERIC = [
    ("empty", b"", False),
    ("blank_lines", b"\n \n\t\n", False),
    ("nul_bytes", b"time,indoor_c\n\x00\x00\x00\x00", False),
    ("utf16_bom", "time,indoor_c,heating_w\n2024-01-10T00:00Z,20,0\n".encode("utf-16"), False),
    ("utf16le_no_bom", "time,indoor_c,heating_w\n2024-01-10T00:00Z,20,0\n".encode("utf-16-le"), False),
    ("random_binary", bytes((i * 151 + 7) % 256 for i in range(4096)), False),
    ("zip_signature", b"PK\x03\x04" + bytes(60), False),
    ("directory", DIR, False),
]


def _log(text=GOOD_LOG, row=None, column=None, value=None):
    """GOOD_LOG with one cell replaced (row = file line, header = 1)."""
    lines = text.splitlines()
    if row is not None:
        header = lines[0].split(",")
        cells = lines[row - 1].split(",")
        cells[header.index(column)] = value
        lines[row - 1] = ",".join(cells)
    return "\n".join(lines) + "\n"


_HDR = GOOD_LOG.splitlines()[0]
_BODY = GOOD_LOG.splitlines()[1:]

LOG_CASES = [
    ("header_only", _HDR + "\n", r"row 1"),
    ("missing_indoor", GOOD_LOG.replace("indoor_c", "inside"), r"column 'indoor_c'"),
    ("text_in_indoor", _log(row=5, column="indoor_c", value="warm"), r"row 5, column 'indoor_c'"),
    ("formula_eq", _log(row=3, column="heating_w", value="=cmd|' /C calc'!A0"), r"row 3, column 'heating_w'"),
    ("formula_at", _log(row=4, column="indoor_c", value="@SUM(A1:A9)"), r"row 4, column 'indoor_c'"),
    ("formula_minus", _log(row=6, column="heating_w", value="-2+3+cmd|' /C calc'!A0"), r"row 6, column 'heating_w'"),
    ("inf_heating", _log(row=7, column="heating_w", value="inf"), r"row 7, column 'heating_w'"),
    ("minus_inf_indoor", _log(row=7, column="indoor_c", value="-inf"), r"row 7, column 'indoor_c'"),
    ("huge_heating", _log(row=8, column="heating_w", value="1e308"), r"row 8, column 'heating_w'"),
    ("overflow_heating", _log(row=8, column="heating_w", value="1e999"), r"row 8, column 'heating_w'"),
    ("negative_heating", _log(row=9, column="heating_w", value="-350"), r"row 9, column 'heating_w'"),
    ("indoor_500c", _log(row=10, column="indoor_c", value="500"), r"row 10, column 'indoor_c'"),
    ("indoor_below_absolute_zero", _log(row=10, column="indoor_c", value="-300"), r"row 10, column 'indoor_c'"),
    ("outdoor_1e308", _log(row=11, column="outdoor_c", value="1e308"), r"row 11, column 'outdoor_c'"),
    ("year_1066", _log(row=4, column="time", value="1066-10-14T09:00-00:00"), r"row 4, column 'time'"),
    ("year_9999", _log(row=4, column="time", value="9999-12-31T23:59-05:00"), r"row 4, column 'time'"),
    ("unparseable_time", _log(row=12, column="time", value="yesterday"), r"row 12, column 'time'"),
    ("empty_time", _log(row=12, column="time", value=""), r"row 12, column 'time'"),
    ("offset_25h", _log(row=5, column="time", value="2024-01-10T01:00+25:00"), r"row 5, column 'time'"),
    ("epoch_integer_time", _log(row=5, column="time", value="1704866400"), r"row 5, column 'time'"),
    ("duplicated_time_other_values", "\n".join([_HDR, *_BODY[:3], _BODY[2].replace(",1000,", ",7,").replace(
        "20.2", "21.5"), *_BODY[3:]]) + "\n", r"row 5, column 'time'"),
    ("unsorted_times", "\n".join([_HDR, _BODY[1], _BODY[0], *_BODY[2:]]) + "\n", r"row 3, column 'time'"),
    ("ragged_row", "\n".join([_HDR, *_BODY[:4], _BODY[4] + ",9,9", *_BODY[5:]]) + "\n", r"row 6"),
    ("naive_times_no_tz", GOOD_LOG.replace("-05:00", ""), r"column 'time'"),
    ("semicolon_without_map", GOOD_LOG.replace(",", ";"), r"row 1"),
    ("huge_cell", _log(row=3, column="indoor_c", value="9" * 200_000), r"row 3, column 'indoor_c'"),
    ("gigantic_header_no_required", ",".join(f"c{i}" for i in range(20_000)) + "\n" + ",".join(["1"] * 20_000)
     + "\n", r"row 1"),
    ("gigantic_header_ragged", _HDR + "," + ",".join(f"x{i}" for i in range(20_000)) + "\n" + "\n".join(_BODY)
     + "\n" + ",".join(["1"] * 30_000) + "\n", r"row \d+"),
    ("two_rows_only", "\n".join([_HDR, *_BODY[:2]]) + "\n", None),  # the whole file is the place
]

# Logs that only a reader of that format sees: a damaged workbook and a damaged Parquet file.
LOG_BINARY_CASES = [
    ("fake_xlsx", b"PK\x03\x04 not really a workbook", ".xlsx"),
    ("empty_xlsx", b"", ".xlsx"),
    ("fake_parquet", b"PAR1garbagegarbagePAR1", ".parquet"),
    ("csv_named_parquet", GOOD_LOG.encode(), ".parquet"),
]


def _put(path, content):
    if content is DIR:
        path.mkdir()
    elif content is MISSING:
        pass
    elif isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    return path


def _outputs(tmp_path, existing):
    """The output folder, with a sentinel in every output file when ``existing``."""
    out = tmp_path / "out"
    out.mkdir()
    if existing:
        for name in ("out.json", "out.csv", "summary.json", "out.parquet", "report-2023-02.html"):
            (out / name).write_bytes(b"SENTINEL: an earlier run's output\n")
    return out


def _check(tmp_path, argv, name, place, needle, variants=(False, True)):
    """Run once per variant: an empty output folder, or one holding earlier outputs."""
    for existing in variants:
        out = tmp_path / "out"
        if out.exists():
            import shutil

            shutil.rmtree(out)
        _outputs(tmp_path, existing)
        before = snapshot(out)
        result = runner.invoke(app, [a.replace("{OUT}", str(out)) for a in argv])
        line = assert_one_line_error(result, name, place=place, needle=needle)
        assert snapshot(out) == before, "the output folder changed after a failed run"
    return line


def _check_parser(tmp_path, argv):
    """Options with exists=True, dir_okay=False: typer's own usage error, exit 2 (typer docs, path.md)."""
    out = _outputs(tmp_path, True)
    before = snapshot(out)
    result = runner.invoke(app, [a.replace("{OUT}", str(out)) for a in argv])
    assert result.exit_code == 2 and "Traceback" not in result.output
    assert "does not exist" in result.stderr or "is a directory" in result.stderr
    assert snapshot(out) == before


# ------------------------------------------------------------------------------------------
# Logs: inspect, calibrate, simulate, report (through a home file)
# ------------------------------------------------------------------------------------------

def _log_argv(tmp_path, bad, k):
    which = k % 4
    if which == 0:
        return ["inspect", str(bad), "--out", "{OUT}/out.json"]
    if which == 1:
        return ["calibrate", str(bad), "--out", "{OUT}/out.json", "--model", "1R1C"]
    if which == 2:
        result = write_good_result(tmp_path / "result.json")
        return ["simulate", str(result), "--log", str(bad), "--out", "{OUT}/out.csv"]
    home = tmp_path / "home.toml"
    home.write_text(f'name = "invented"\n[log]\nfile = "{bad.name}"\n', encoding="utf-8")
    return ["report", str(home), "--month", "2024-01", "--out", "{OUT}"]


ALL_LOG = ([(n, c, p, None, ".csv") for n, c, p in GENERIC]
           + [(n, c, needle is not None, needle, ".csv") for n, c, needle in LOG_CASES]
           + [(n, c, False, None, ext) for n, c, ext in LOG_BINARY_CASES])


@pytest.mark.parametrize("k, case", list(enumerate(ALL_LOG)), ids=[c[0] for c in ALL_LOG])
def test_hostile_log(tmp_path, k, case):
    name, content, place, needle, ext = case
    if content is DIR and k % 4 in (1, 2):
        k = 0  # typer refuses a folder for calibrate and simulate itself (exists=True, dir_okay=False)
    bad = _put(tmp_path / f"hostile_log{ext}", content)
    _check(tmp_path, _log_argv(tmp_path, bad, k), bad.name, place, needle, variants=(k % 2 == 1,))


def _assert_case(tmp_path, k, case, argv_for, stem, ext):
    name, content, needle = case[:3]
    bad = _put(tmp_path / f"{stem}{ext}", content)
    named = case[3] if len(case) > 3 else bad.name
    # Alternate the two output-folder variants over the corpus to halve its run time.
    _check(tmp_path, argv_for(tmp_path, bad, k), named, needle is not None, needle, variants=(k % 2 == 1,))


def _generic(ext=".toml"):
    return [(n, c, None) for n, c, _ in GENERIC]


# ------------------------------------------------------------------------------------------
# Column maps: inspect --map, calibrate --map, simulate --map (with the invented logger export)
# ------------------------------------------------------------------------------------------

GOOD_MAP = (DATA / "invented_logger_map.toml").read_text(encoding="utf-8")


def _map(old, new):
    assert old in GOOD_MAP
    return GOOD_MAP.replace(old, new, 1)


MAP_CASES = _generic() + [
    ("truncated_toml", GOOD_MAP[: GOOD_MAP.index("[columns]") + 5], None),  # "at end of document"
    ("unclosed_string", _map('column = "Date/Time"', 'column = "Date/Time'), r"row \d+"),
    ("unknown_section", GOOD_MAP + "\n[extras]\nx = 1\n", r"column 'extras'"),
    ("unknown_time_key", _map('[time]\n', '[time]\nzone = "UTC"\n'), r"column 'time.zone'"),
    ("unknown_file_key", _map('[file]\n', '[file]\nquote = "x"\n'), r"column 'file.quote'"),
    ("bad_tz", _map('tz = "America/New_York"', 'tz = "Mars/Olympus_Mons"'), None),
    ("path_traversal_tz", _map('tz = "America/New_York"', 'tz = "../../../../etc/passwd"'), None),
    ("interval_wrong", _map('interval = "start"', 'interval = "middle"'), r"column 'time.interval'"),
    ("interval_number", _map('interval = "start"', 'interval = 5'), r"column 'time.interval'"),
    ("columns_not_table", _map('[columns]\n', '[columns_x]\n').replace("[columns_x]", "columns = 3\n[columns_x]"),
     r"column '"),
    ("unknown_target", _map('[columns]\n', '[columns]\nbasement_c = "Inside (F)"\n'), r"column 'columns.basement_c'"),
    ("unknown_unit", _map('unit = "degF" }', 'unit = "furlongs" }'), r"column 'columns.indoor_c.unit'"),
    ("unit_number", _map('unit = "degF" }', 'unit = 7 }'), r"column 'columns.indoor_c.unit'"),
    ("stage_without_column", _map('column = "Stage 1 run (s)"\n', ''), r"column 'heating\[0\]'"),
    ("rating_negative", _map('rating = 40000', 'rating = -40000'), r"column 'heating\[0\].rating'"),
    ("rating_nan", _map('rating = 40000', 'rating = nan'), r"column 'heating\[0\].rating'"),
    ("rating_inf", _map('rating = 40000', 'rating = inf'), r"column 'heating\[0\].rating'"),
    ("rating_text", _map('rating = 40000', 'rating = "lots"'), r"column 'heating\[0\].rating'"),
    ("efficiency_zero", _map('efficiency = 0.95', 'efficiency = 0.0'), r"column 'heating\[0\].efficiency'"),
    ("efficiency_1e308", _map('efficiency = 0.95', 'efficiency = 1e308'), r"column 'heating\[0\].efficiency'"),
    ("cop_negative", _map('[10.0, 4.0]', '[10.0, -4.0]'), r"column 'heating\[1\].cop'"),
    ("cop_ragged", _map('[10.0, 4.0]', '[10.0]'), r"column 'heating\[1\].cop'"),
    ("cop_same_temps", _map('[-10.0, 2.0]', '[10.0, 2.0]'), r"column 'heating\[1\].cop'"),
    ("runtime_unit_unknown", _map('runtime = "s"', 'runtime = "fortnights"'), r"column 'heating\[0\].runtime'"),
    ("heating_twice", _map('[columns]\n', '[columns]\nheating_w = "Heat pump (kW)"\n'), r"column 'heating'"),
    ("skip_rows_text", _map('[file]\n', '[file]\nskip_rows = "three"\n'), r"column 'file.skip_rows'"),
    ("skip_rows_negative", _map('[file]\n', '[file]\nskip_rows = -4\n'), r"column 'file.skip_rows'"),
    ("encoding_number", _map('[file]\n', '[file]\nencoding = 8\n'), r"column 'file.encoding'"),
    ("delimiter_empty", _map('delimiter = ";"', 'delimiter = ""'), r"column 'file.delimiter'"),
    ("time_format_number", _map('format = "%d.%m.%Y %H:%M"', 'format = 12'), r"column 'time.format'"),
    ("time_column_number", _map('column = "Date/Time"', 'column = 5'), r"column 'time.column'"),
    ("sort_text", _map('[time]\n', '[time]\nsort = "sometimes"\n'), r"column 'time.sort'"),
    ("interval_s_negative", _map('[time]\n', '[time]\ninterval_s = -300\n'), r"column 'time.interval_s'"),
]


def _map_argv(tmp_path, bad, k):
    log = str(DATA / "invented_logger.csv")
    which = k % 3
    if which == 0:
        return ["inspect", log, "--map", str(bad), "--out", "{OUT}/out.json"]
    if which == 1:
        return ["calibrate", log, "--map", str(bad), "--out", "{OUT}/out.json", "--model", "1R1C"]
    result = write_good_result(tmp_path / "result.json")
    return ["simulate", str(result), "--log", log, "--map", str(bad), "--out", "{OUT}/out.csv"]


@pytest.mark.parametrize("k, case", list(enumerate(MAP_CASES)), ids=[c[0] for c in MAP_CASES])
def test_hostile_column_map(tmp_path, k, case):
    if case[1] is DIR:
        k = 0
    _assert_case(tmp_path, k, case, _map_argv, "hostile_map", ".toml")


# ------------------------------------------------------------------------------------------
# Weather files: forecast --weather, setback --weather, calibrate --weather
# ------------------------------------------------------------------------------------------

_W = GOOD_WEATHER.splitlines()
_WH = _W[2].split(",")


def _weather(row, column, value):
    lines = list(_W)
    cells = lines[row - 1].split(",")
    cells[_WH.index(column)] = value
    lines[row - 1] = ",".join(cells)
    return "\n".join(lines) + "\n"


TMY3_TEXT = TMY3.read_text(encoding="utf-8")
_T = TMY3_TEXT.splitlines()


def _tmy3(row, col, value):
    lines = list(_T)
    cells = next(csv.reader([lines[row - 1]]))
    cells[col] = value
    buf = io.StringIO()
    csv.writer(buf, lineterminator="").writerow(cells)
    lines[row - 1] = buf.getvalue()
    return "\n".join(lines) + "\n"


WEATHER_CASES = [(n, c, None) for n, c, _ in GENERIC] + [
    ("header_only", "\n".join(_W[:3]) + "\n", r"row 3"),
    ("missing_ghi", GOOD_WEATHER.replace(",ghi_w_m2", ",sun"), r"column 'ghi_w_m2'"),
    ("latitude_text", GOOD_WEATHER.replace("# latitude = 36.1", "# latitude = north"), r"row 1, column 'latitude'"),
    ("latitude_999", GOOD_WEATHER.replace("# latitude = 36.1", "# latitude = 999"), r"row 1, column 'latitude'"),
    ("longitude_nan", GOOD_WEATHER.replace("# longitude = -79.9", "# longitude = nan"), r"row 2, column 'longitude'"),
    ("altitude_inf", "# altitude_m = inf\n" + GOOD_WEATHER, r"row 1, column 'altitude_m'"),
    ("outdoor_text", _weather(6, "outdoor_c", "mild"), r"row 6, column 'outdoor_c'"),
    ("outdoor_nan_text", _weather(6, "outdoor_c", "NaN%"), r"row 6, column 'outdoor_c'"),
    ("outdoor_1e308", _weather(7, "outdoor_c", "1e308"), r"row 7, column 'outdoor_c'"),
    ("outdoor_inf", _weather(7, "outdoor_c", "inf"), r"row 7, column 'outdoor_c'"),
    ("outdoor_below_absolute_zero", _weather(8, "outdoor_c", "-400"), r"row 8, column 'outdoor_c'"),
    ("ghi_negative_large", _weather(9, "ghi_w_m2", "-999"), r"row 9, column 'ghi_w_m2'"),
    ("ghi_formula", _weather(9, "ghi_w_m2", "=cmd|' /C calc'!A0"), r"row 9, column 'ghi_w_m2'"),
    ("ghi_plus_formula", _weather(9, "ghi_w_m2", "+cmd|' /C calc'!A0"), r"row 9, column 'ghi_w_m2'"),
    ("time_absurd", _weather(10, "time", "0001-01-01T00:00+00:00"), r"row 10, column 'time'"),
    ("time_garbage", _weather(10, "time", "@now"), r"row 10, column 'time'"),
    ("time_duplicated", "\n".join(_W[:5] + [_W[4]] + _W[5:]) + "\n", r"row 6, column 'time'"),
    ("time_unsorted", "\n".join(_W[:3] + [_W[4], _W[3]] + _W[5:]) + "\n", r"row 5, column 'time'"),
    ("ragged", "\n".join(_W[:6] + [_W[6] + ",1,2,3"] + _W[7:]) + "\n", r"row 7"),
    ("gigantic_header", "\n".join(_W[:2] + [",".join(f"c{i}" for i in range(20_000))] + _W[3:]) + "\n",
     r"row 3"),
    ("tmy3_truncated_header", "\n".join(_T[:1]) + "\n", None),
    ("tmy3_latitude_text", _T[0].replace(_T[0].split(",")[4], "north", 1) + "\n" + "\n".join(_T[1:]) + "\n", None),
    ("tmy3_drybulb_text", _tmy3(30, 31, "warm"), r"row 30"),
    ("tmy3_ghi_1e308", _tmy3(31, 4, "1e308"), r"row 31"),
    ("tmy3_date_garbage", _tmy3(32, 0, "13/45/1990"), r"row 32"),
    ("tmy3_rows_missing", "\n".join(_T[:40]) + "\n", None),
    ("epw_truncated", "LOCATION,Quillhaven (invented),XX,XX,INVENTED,000000,45.37,-90.84,-6.0,420.0\n"
     "DESIGN CONDITIONS,0\n", None),
]


def _epw_text():
    import tempfile

    from tests.test_read import _epw_from_tmy3

    with tempfile.TemporaryDirectory() as folder:
        path = pathlib.Path(folder) / "w.epw"
        _epw_from_tmy3(path)
        return path.read_text(encoding="utf-8")


_E = _epw_text().splitlines()


def _epw(row, col, value):
    lines = list(_E)
    cells = lines[row - 1].split(",")
    cells[col] = value
    lines[row - 1] = ",".join(cells)
    return "\n".join(lines) + "\n"


# EPW: 8 header lines, data from line 9; field 6 is the dry-bulb temperature, 13 the GHI and 21
# the wind speed (EnergyPlus Auxiliary Programs, weather file format).
WEATHER_CASES += [
    ("epw_drybulb_text", _epw(20, 6, "warm"), r"row 20, column 'temp_air'"),
    ("epw_drybulb_missing_code", _epw(21, 6, "99.9"), r"row 21, column 'temp_air'"),
    ("epw_ghi_1e308", _epw(22, 13, "1e308"), r"row 22, column 'ghi'"),
    ("epw_wind_negative", _epw(23, 21, "-5"), r"row 23, column 'wind_speed'"),
    ("epw_tz_text", "\n".join([_E[0].replace(",-5.0,", ",east,")] + _E[1:]) + "\n", None),
    ("epw_latitude_text", "\n".join([_E[0].replace(",36.1,", ",north,")] + _E[1:]) + "\n", None),
    ("epw_rows_missing", "\n".join(_E[:5000]) + "\n", None),
    ("epw_month_13", _epw(30, 1, "13"), None),
]


def _weather_argv(tmp_path, bad, k):
    result = write_good_result(tmp_path / "result.json")
    which = k % 3
    if which == 0:
        return ["forecast", str(result), "--weather", str(bad), "--out", "{OUT}/out.csv",
                "--summary", "{OUT}/summary.json", "--draws", "0"]
    if which == 1:
        return ["setback", str(result), "--weather", str(bad), "--strategies", str(EXAMPLES / "strategies.toml"),
                "--out", "{OUT}/out.csv", "--summary", "{OUT}/summary.json"]
    log = tmp_path / "log.csv"
    log.write_text(GOOD_LOG.replace(",outdoor_c", "").replace(",2.0\n", "\n"), encoding="utf-8")
    return ["calibrate", str(log), "--weather", str(bad), "--out", "{OUT}/out.json", "--model", "1R1C"]


@pytest.mark.parametrize("k, case", list(enumerate(WEATHER_CASES)), ids=[c[0] for c in WEATHER_CASES])
def test_hostile_weather(tmp_path, k, case):
    if case[1] is DIR:
        k = 0
    ext = ".epw" if case[0].startswith("epw") else ".csv"
    _assert_case(tmp_path, k, case, _weather_argv, "hostile_weather", ext)


def _replace(text, old, new):
    assert old in text, old
    return text.replace(old, new, 1)


def _toml_generic():
    return [(n, c, None) for n, c, _ in GENERIC] + [("missing_file", MISSING, None)]


# ------------------------------------------------------------------------------------------
# Constructions: biot, calibrate --construction
# ------------------------------------------------------------------------------------------

GOOD_CONSTRUCTION = (DATA / "construction_handcalc.toml").read_text(encoding="utf-8")


def _c(old, new):
    return _replace(GOOD_CONSTRUCTION, old, new)


CONSTRUCTION_CASES = _toml_generic() + [
    ("truncated", GOOD_CONSTRUCTION[: GOOD_CONSTRUCTION.index("[[elements]]") + 6], None),
    ("bad_syntax", _c("ach = 0.6", "ach = = 0.6"), r"row \d+"),
    ("unknown_top_key", "colour = 'red'\n" + GOOD_CONSTRUCTION, r"column 'colour'"),
    ("floor_area_zero", _c("floor_area_m2 = 40.0", "floor_area_m2 = 0.0"), r"column 'floor_area_m2'"),
    ("floor_area_negative", _c("floor_area_m2 = 40.0", "floor_area_m2 = -40.0"), r"column 'floor_area_m2'"),
    ("floor_area_nan", _c("floor_area_m2 = 40.0", "floor_area_m2 = nan"), r"column 'floor_area_m2'"),
    ("floor_area_inf", _c("floor_area_m2 = 40.0", "floor_area_m2 = inf"), r"column 'floor_area_m2'"),
    ("floor_area_1e308", _c("floor_area_m2 = 40.0", "floor_area_m2 = 1e308"), r"column 'floor_area_m2'"),
    ("floor_area_text", _c("floor_area_m2 = 40.0", "floor_area_m2 = 'forty'"), r"column 'floor_area_m2'"),
    ("floor_area_bool", _c("floor_area_m2 = 40.0", "floor_area_m2 = true"), r"column 'floor_area_m2'"),
    ("no_air_leakage", _c("[air_leakage]\nach = 0.6\nvolume_m3 = 100.0\n", ""), r"column 'air_leakage'"),
    ("ach_negative", _c("ach = 0.6", "ach = -0.6"), r"column 'air_leakage.ach'"),
    ("ach_absurd", _c("ach = 0.6", "ach = 1e6"), r"column 'air_leakage.ach'"),
    ("volume_zero", _c("volume_m3 = 100.0", "volume_m3 = 0"), r"column 'air_leakage.volume_m3'"),
    ("elements_not_list", "elements = 5\n" + GOOD_CONSTRUCTION[: GOOD_CONSTRUCTION.index("[[elements]]")],
     r"column 'elements'"),
    ("area_negative", _c("area_m2 = 60.0", "area_m2 = -60.0"), r"column 'elements\[0\].area_m2'"),
    ("thickness_zero", _c("thickness_m = 0.0125", "thickness_m = 0.0"), r"column 'elements\[0\].layers\[0\]"),
    ("thickness_1e308", _c("thickness_m = 0.0125", "thickness_m = 1e308"), r"column 'elements\[0\].layers\[0\]"),
    ("conductivity_negative", _c("conductivity_w_per_mk = 0.25", "conductivity_w_per_mk = -0.25"),
     r"column 'elements\[0\].layers\[0\]"),
    ("conductivity_nan", _c("conductivity_w_per_mk = 0.25", "conductivity_w_per_mk = nan"),
     r"column 'elements\[0\].layers\[0\]"),
    ("density_zero", _c("density_kg_per_m3 = 900.0", "density_kg_per_m3 = 0.0"),
     r"column 'elements\[0\].layers\[0\]"),
    ("specific_heat_inf", _c("specific_heat_j_per_kgk = 1000.0", "specific_heat_j_per_kgk = inf"),
     r"column 'elements\[0\].layers\[0\]"),
    ("unknown_kind", _c('kind = "external_wall"', 'kind = "moat"'), r"column 'elements\[0\].kind'"),
    ("unknown_layer_key", _c('name = "plasterboard"', 'name = "plasterboard"\n  colour = "white"'),
     r"column 'elements\[0\].layers\[0\]"),
    ("duplicate_element", _c('name = "roof"', 'name = "wall"'), r"column 'elements\[1\].name'"),
    ("window_u_negative", _c("u_value_w_m2k = 1.6", "u_value_w_m2k = -1.6"), r"column 'elements\[2\]"),
    ("g_value_above_one", _c("g_value = 0.5", "g_value = 5.0"), r"column 'elements\[2\]"),
    ("orientation_absurd", _c("orientation = 180", "orientation = 1e308"), r"column 'elements\[0\].orientation'"),
    ("formula_name", _c('name = "wall"', 'name = 7'), r"column 'elements\[0\].name'"),
    ("volume_1e308", _c("volume_m3 = 100.0", "volume_m3 = 1e308"), r"column 'air_leakage.volume_m3'"),
    ("area_1e308", _c("area_m2 = 60.0", "area_m2 = 1e308"), r"column 'elements\[0\].area_m2'"),
]


def _construction_argv(tmp_path, bad, k):
    if k % 2 == 0:
        return ["biot", str(bad), "--out", "{OUT}/out.json"]
    return ["calibrate", str(DATA / "invented_logger.csv"), "--map", str(DATA / "invented_logger_map.toml"),
            "--construction", str(bad), "--out", "{OUT}/out.json", "--model", "1R1C"]


@pytest.mark.parametrize("k, case", list(enumerate(CONSTRUCTION_CASES)), ids=[c[0] for c in CONSTRUCTION_CASES])
def test_hostile_construction(tmp_path, k, case):
    if case[1] in (DIR, MISSING):  # both commands declare the file exists=True, dir_okay=False
        bad = _put(tmp_path / "hostile_construction.toml", case[1])
        _check_parser(tmp_path, _construction_argv(tmp_path, bad, k))
        return
    _assert_case(tmp_path, k, case, _construction_argv, "hostile_construction", ".toml")


# ------------------------------------------------------------------------------------------
# Schedules: forecast --schedule
# ------------------------------------------------------------------------------------------

GOOD_SCHEDULE = (EXAMPLES / "schedule.toml").read_text(encoding="utf-8")


def _s(old, new):
    return _replace(GOOD_SCHEDULE, old, new)


SCHEDULE_CASES = _toml_generic() + [
    ("truncated", GOOD_SCHEDULE[: GOOD_SCHEDULE.index("[week]") + 3], None),
    ("bad_syntax", _s("day_c = 20.5", "day_c = 20.5.1"), r"row \d+"),
    ("unknown_top_key", "colour = 'red'\n" + GOOD_SCHEDULE, r"column 'colour'"),
    ("level_nan", _s("day_c = 20.5", "day_c = nan"), r"column 'levels.day_c'"),
    ("level_inf", _s("day_c = 20.5", "day_c = inf"), r"column 'levels.day_c'"),
    ("level_1e308", _s("day_c = 20.5", "day_c = 1e308"), r"column 'levels.day_c'"),
    ("level_below_absolute_zero", _s("night_c = 17.0", "night_c = -300.0"), r"column 'levels.night_c'"),
    ("level_text", _s("day_c = 20.5", "day_c = 'warm'"), r"column 'levels.day_c'"),
    ("level_bool", _s("day_c = 20.5", "day_c = true"), r"column 'levels.day_c'"),
    ("unknown_day", _s("weekdays = ", "caturday = "), r"column 'week.caturday'"),
    ("time_25h", _s('["06:30", "day"]', '["25:30", "day"]'), r"column 'week.weekdays"),
    ("time_garbage", _s('["06:30", "day"]', '["=cmd|\' /C calc\'!A0", "day"]'), r"column 'week.weekdays"),
    ("time_number", _s('["06:30", "day"]', '[630, "day"]'), r"column 'week.weekdays"),
    ("unknown_level", _s('["06:30", "day"]', '["06:30", "tropical"]'), r"column 'week.weekdays"),
    ("entry_not_pair", _s('["06:30", "day"]', '["06:30"]'), r"column 'week.weekdays"),
    ("entry_setpoint_absurd", _s('["06:30", "day"]', '["06:30", 1e308]'), r"column 'week.weekdays"),
    ("unsorted_times", _s('[["06:30", "day"], ["23:00", "night"]]', '[["23:00", "night"], ["06:30", "day"]]'),
     r"column 'week.weekdays"),
    ("duplicated_times", _s('[["06:30", "day"], ["23:00", "night"]]', '[["06:30", "day"], ["06:30", "night"]]'),
     r"column 'week.weekdays"),
    ("week_not_table", _s("weekdays = ", "x_weekdays = ").replace("[week]", "week = 3\n[weekx]"), r"column '"),
    ("holiday_bad_date", _s('"07-04"', '"13-45"'), r"column 'holidays"),
    ("holiday_number", _s('"07-04"', '704'), r"column 'holidays"),
    ("away_end_before_start", _s('start = "02-10"', 'start = "2024-02-10"').replace('end = "02-16"', 'end = "2024-02-01"'),
     r"column 'away"),
    ("away_bad_level", _s('level = "away"', 'level = "moon"'), r"column 'away"),
    ("away_absurd_year", _s('start = "02-10"', 'start = "0001-02-10"'), r"column 'away"),
    ("holidays_not_list", _s('holidays = ["01-01", "07-04", "12-25", "12-26"]', 'holidays = 5'), r"column 'holidays"),
]


def _schedule_argv(tmp_path, bad, k):
    result = write_good_result(tmp_path / "result.json")
    return ["forecast", str(result), "--weather", str(TMY3), "--schedule", str(bad), "--out", "{OUT}/out.csv",
            "--summary", "{OUT}/summary.json", "--draws", "0"]


@pytest.mark.parametrize("k, case", list(enumerate(SCHEDULE_CASES)), ids=[c[0] for c in SCHEDULE_CASES])
def test_hostile_schedule(tmp_path, k, case):
    _assert_case(tmp_path, k, case, _schedule_argv, "hostile_schedule", ".toml")


# ------------------------------------------------------------------------------------------
# Strategies: setback --strategies
# ------------------------------------------------------------------------------------------

GOOD_STRATEGIES = (EXAMPLES / "strategies.toml").read_text(encoding="utf-8")


def _st(old, new):
    return _replace(GOOD_STRATEGIES, old, new)


STRATEGY_CASES = _toml_generic() + [
    ("truncated", GOOD_STRATEGIES[: GOOD_STRATEGIES.index("[[strategy]]") + 4], None),
    ("bad_syntax", _st("capacity_w = 10000.0", "capacity_w = 10 000.0"), r"row \d+"),
    ("unknown_top_key", "colour = 'red'\n" + GOOD_STRATEGIES, r"column 'colour'"),
    ("heater_unknown", _st('heater = "capacity"', 'heater = "volcano"'), r"column 'heater'"),
    ("capacity_zero", _st("capacity_w = 10000.0", "capacity_w = 0.0"), r"column 'capacity_w'"),
    ("capacity_negative", _st("capacity_w = 10000.0", "capacity_w = -10000.0"), r"column 'capacity_w'"),
    ("capacity_nan", _st("capacity_w = 10000.0", "capacity_w = nan"), r"column 'capacity_w'"),
    ("capacity_inf", _st("capacity_w = 10000.0", "capacity_w = inf"), r"column 'capacity_w'"),
    ("capacity_text", _st("capacity_w = 10000.0", "capacity_w = 'big'"), r"column 'capacity_w'"),
    ("no_baseline", _st('[baseline]\nname = "steady 20.5"\nconstant_c = 20.5\n', ''), r"column 'baseline'"),
    ("baseline_nan", _st("constant_c = 20.5", "constant_c = nan"), r"column 'baseline"),
    ("baseline_1e308", _st("constant_c = 20.5", "constant_c = 1e308"), r"column 'baseline"),
    ("strategy_not_array", "strategy = 4\n" + GOOD_STRATEGIES[: GOOD_STRATEGIES.index("[[strategy]]")],
     r"column 'strategy'"),
    ("capacity_1e308", _st("capacity_w = 10000.0", "capacity_w = 1e308"), r"column 'capacity_w'"),
    ("preheat_negative", _st("preheat_h = 1.0", "preheat_h = -1.0"), r"column 'strategy\[2\]"),
    ("preheat_huge", _st("preheat_h = 1.0", "preheat_h = 1e308"), r"column 'strategy\[2\]"),
    ("optimal_start_text", _st("optimal_start = true", "optimal_start = 'yes'"), r"column 'strategy\[3\]"),
    ("max_lead_zero", _st("max_lead_h = 6.0", "max_lead_h = 0.0"), r"column 'strategy\[3\]"),
    ("week_time_garbage", _st('["06:00", 20.5], ["22:00", 16.0]]', '["6 o\'clock", 20.5], ["22:00", 16.0]]'),
     r"column 'strategy\[1\]"),
    ("week_setpoint_inf", _st('["06:00", 20.5], ["22:00", 16.0]]', '["06:00", inf], ["22:00", 16.0]]'),
     r"column 'strategy\[1\]"),
    ("schedule_file_missing", _st('schedule_file = "schedule.toml"', 'schedule_file = "nowhere.toml"'),
     r"column 'strategy\[4\]"),
    # A path out of the folder is the user's choice; a file that is no schedule is refused by its own name.
    ("schedule_file_traversal", _st('schedule_file = "schedule.toml"',
                                    'schedule_file = "../../../../../../../../etc/passwd"'), r"row 1", "passwd"),
    ("schedule_file_is_folder", _st('schedule_file = "schedule.toml"', 'schedule_file = "."'),
     r"column 'strategy\[4\]"),
    ("duplicate_names", _st('name = "night 16.0, 8 h"', 'name = "night 17.0"'), r"column 'strategy\[1\]"),
    ("name_number", _st('name = "night 17.0"', 'name = 17'), r"column 'strategy\[0\]"),
    ("unknown_strategy_key", _st("preheat_h = 1.0", "preheat_h = 1.0\nteleport = true"), r"column 'strategy\[2\]"),
]


def _strategy_argv(tmp_path, bad, k):
    result = write_good_result(tmp_path / "result.json")
    return ["setback", str(result), "--weather", str(TMY3), "--strategies", str(bad), "--out", "{OUT}/out.csv",
            "--summary", "{OUT}/summary.json"]


@pytest.mark.parametrize("k, case", list(enumerate(STRATEGY_CASES)), ids=[c[0] for c in STRATEGY_CASES])
def test_hostile_strategies(tmp_path, k, case):
    (tmp_path / "schedule.toml").write_text(GOOD_SCHEDULE, encoding="utf-8")
    _assert_case(tmp_path, k, case, _strategy_argv, "hostile_strategies", ".toml")


# ------------------------------------------------------------------------------------------
# Home files: report
# ------------------------------------------------------------------------------------------

GOOD_HOME = ('name = "27 Larchmere Row, Quillhaven (invented)"\nfloor_area_m2 = 120.0\n'
             '[log]\nfile = "log.csv"\ntz = "America/New_York"\n'
             '[model]\npreset = "1R1C"\ngains = "constant"\n')


def _h(old, new):
    return _replace(GOOD_HOME, old, new)


HOME_CASES = _toml_generic() + [
    ("truncated", GOOD_HOME[: GOOD_HOME.index("[model]") + 3], None),
    ("bad_syntax", _h('preset = "1R1C"', 'preset = "1R1C'), r"row \d+"),
    ("unknown_top_key", "colour = 'red'\n" + GOOD_HOME, r"column 'colour'"),
    ("no_log", _h('[log]\nfile = "log.csv"\ntz = "America/New_York"\n', ''), r"column 'log'"),
    ("log_missing_file", _h('file = "log.csv"', 'file = "nowhere.csv"'), r"column 'log.file'"),
    ("log_traversal", _h('file = "log.csv"', 'file = "../../../../../../../../no/such/log.csv"'),
     r"column 'log.file'"),
    ("log_is_folder", _h('file = "log.csv"', 'file = "."'), r"column 'log.file'"),
    ("log_file_number", _h('file = "log.csv"', 'file = 42'), r"column 'log.file'"),
    ("log_unknown_key", _h('tz = "America/New_York"', 'tz = "America/New_York"\nformat = "csv"'),
     r"column 'log.format'"),
    ("tz_unknown", _h('tz = "America/New_York"', 'tz = "Atlantis/Central"'), r"column 'log.tz'"),
    ("interval_wrong", _h('tz = "America/New_York"', 'tz = "America/New_York"\ninterval = "middle"'),
     r"column 'log.interval'"),
    ("preset_unknown", _h('preset = "1R1C"', 'preset = "9R9C"'), r"column 'model.preset'"),
    ("gains_unknown", _h('gains = "constant"', 'gains = "lunar"'), r"column 'model.gains'"),
    ("gains_hours_for_constant", _h('gains = "constant"', 'gains = "constant"\ngains_hours = [7, 23]'),
     r"column 'model.gains_hours'"),
    ("gains_hours_text", _h('gains = "constant"', 'gains = "four-period"\ngains_hours = "6,9,17,23"'),
     r"column 'model.gains_hours'"),
    ("gains_hours_out_of_order", _h('gains = "constant"', 'gains = "four-period"\ngains_hours = [6, 17, 9, 23]'),
     r"column 'model.gains_hours'"),
    ("gains_hours_nan", _h('gains = "constant"', 'gains = "day-night"\ngains_hours = [7, nan]'),
     r"column 'model.gains_hours'"),
    ("step_zero", _h('gains = "constant"', 'gains = "constant"\nstep_min = 0'), r"column 'model.step_min'"),
    ("step_nan", _h('gains = "constant"', 'gains = "constant"\nstep_min = nan'), r"column 'model.step_min'"),
    ("step_text", _h('gains = "constant"', 'gains = "constant"\nstep_min = "five"'), r"column 'model.step_min'"),
    ("floor_area_negative", _h("floor_area_m2 = 120.0", "floor_area_m2 = -120.0"), r"column 'floor_area_m2'"),
    ("floor_area_inf", _h("floor_area_m2 = 120.0", "floor_area_m2 = inf"), r"column 'floor_area_m2'"),
    ("floor_area_1e308", _h("floor_area_m2 = 120.0", "floor_area_m2 = 1e308"), r"column 'floor_area_m2'"),
    ("site_latitude_100", GOOD_HOME.replace("[log]", "[site]\nlatitude = 100.0\nlongitude = 0.0\n[log]"),
     r"column 'site.latitude'"),
    ("site_latitude_only", GOOD_HOME.replace("[log]", "[site]\nlatitude = 45.0\n[log]"), r"column 'site."),
    ("site_longitude_nan", GOOD_HOME.replace("[log]", "[site]\nlatitude = 45.0\nlongitude = nan\n[log]"),
     r"column 'site.longitude'"),
    ("weather_missing", GOOD_HOME.replace("[log]", "[weather]\nfile = \"nowhere.epw\"\n[log]"),
     r"column 'weather.file'"),
    ("construction_missing", 'construction = "nowhere.toml"\n' + GOOD_HOME, r"column 'construction'"),
    ("result_missing", _h('gains = "constant"', 'gains = "constant"\nresult = "nowhere.json"'),
     r"column 'model.result'"),
    ("model_not_table", _h('[model]\npreset = "1R1C"\ngains = "constant"\n', '').replace(
        "floor_area_m2 = 120.0", "floor_area_m2 = 120.0\nmodel = 3"), r"column 'model'"),
    ("name_number", _h('name = "27 Larchmere Row, Quillhaven (invented)"', "name = 27"), r"column 'name'"),
]


def _home_argv(tmp_path, bad, k):
    (tmp_path / "log.csv").write_text(GOOD_LOG, encoding="utf-8")
    return ["report", str(bad), "--month", "2024-01", "--out", "{OUT}"]


@pytest.mark.parametrize("k, case", list(enumerate(HOME_CASES)), ids=[c[0] for c in HOME_CASES])
def test_hostile_home_file(tmp_path, k, case):
    _assert_case(tmp_path, k, case, _home_argv, "hostile_home", ".toml")


# ------------------------------------------------------------------------------------------
# RESULT.json: forecast, setback, simulate
# ------------------------------------------------------------------------------------------

def _result_json(**changes):
    from tests.hardening.conftest import good_result

    body = json.loads(json.dumps(good_result().to_dict()))
    for key, value in changes.items():
        target = body
        *parents, last = key.split("__")
        for p in parents:
            target = target[p]
        if value is DELETE:
            del target[last]
        else:
            target[last] = value
    return json.dumps(body, indent=2)


DELETE = object()
_GOOD_RESULT_TEXT = _result_json()

RESULT_CASES = [(n, c, None) for n, c, _ in GENERIC if n != "blank_lines"] + [
    ("missing_file", MISSING, None),
    ("blank_lines", b"\n \n\t\n", r"row \d+"),
    ("truncated", _GOOD_RESULT_TEXT[: len(_GOOD_RESULT_TEXT) // 2], r"row \d+"),
    ("trailing_garbage", _GOOD_RESULT_TEXT + "\n}}", r"row \d+"),
    ("top_level_list", "[1, 2, 3]", None),
    ("top_level_number", "1e308", None),
    ("nan_literal", _GOOD_RESULT_TEXT.replace('"c_indoor_j_per_k": 3000000.0', '"c_indoor_j_per_k": NaN'),
     r"column 'parameters.c_indoor_j_per_k'"),
    ("infinity_literal", _GOOD_RESULT_TEXT.replace('"c_indoor_j_per_k": 3000000.0', '"c_indoor_j_per_k": Infinity'),
     r"column 'parameters.c_indoor_j_per_k'"),
    ("huge_exponent", _GOOD_RESULT_TEXT.replace('"c_indoor_j_per_k": 3000000.0', '"c_indoor_j_per_k": 1e999'),
     r"column 'parameters.c_indoor_j_per_k'"),
    ("model_unknown", _result_json(model="4R4C"), r"column 'model'"),
    ("model_number", _result_json(model=2), r"column 'model'"),
    ("model_missing", _result_json(model=DELETE), r"column 'model'"),
    ("parameters_list", _result_json(parameters=[1, 2]), r"column 'parameters'"),
    ("parameter_missing", _result_json(parameters__c_indoor_j_per_k=DELETE), r"column 'parameters'"),
    ("parameter_text", _result_json(parameters__c_indoor_j_per_k="3e6"), r"column 'parameters.c_indoor_j_per_k'"),
    ("parameter_bool", _result_json(parameters__c_indoor_j_per_k=True), r"column 'parameters.c_indoor_j_per_k'"),
    ("parameter_null", _result_json(parameters__c_indoor_j_per_k=None), r"column 'parameters.c_indoor_j_per_k'"),
    ("capacitance_negative", _result_json(parameters__c_indoor_j_per_k=-3e6), r"column 'parameters"),
    ("capacitance_envelope_negative", _result_json(parameters__c_envelope_j_per_k=-1.0), r"column 'parameters"),
    ("resistance_negative", _result_json(parameters__r_envelope_outdoor_k_per_w=-0.004), r"column 'parameters"),
    ("resistance_zero", _result_json(parameters__r_indoor_envelope_k_per_w=0.0), r"column 'parameters"),
    ("capacitance_1e308", _result_json(parameters__c_indoor_j_per_k=1e308), r"column 'parameters"),
    ("gains_kind_unknown", _result_json(gains_schedule={"kind": "weekly"}), r"column 'gains_schedule'"),
    ("day_night_without_values", _result_json(gains_schedule={"kind": "day_night"}), r"column 'parameters'"),
    ("day_night_hours_equal", _result_json(gains_schedule={"kind": "day_night", "day_start_h": 7, "night_start_h": 7}),
     r"column 'gains_schedule'"),
    ("step_negative", _result_json(step_s=-300.0), r"column 'step_s'"),
    ("step_text", _result_json(step_s="five minutes"), r"column 'step_s'"),
    ("covariance_ragged", _result_json(covariance={"names": ["r_envelope_outdoor_k_per_w"], "space": "log",
                                                   "matrix": [[1.0, 2.0]]}), r"column 'covariance"),
    ("covariance_not_object", _result_json(covariance="tight"), r"column 'covariance"),
    ("covariance_unknown_name", _result_json(covariance={"names": ["colour"], "space": "log", "matrix": [[1.0]]}),
     r"column 'covariance"),
    ("site_not_table", _result_json(site="Quillhaven"), r"column 'site'"),
]


def _result_argv(tmp_path, bad, k):
    which = k % 3
    if which == 0:
        return ["forecast", str(bad), "--weather", str(TMY3), "--out", "{OUT}/out.csv",
                "--summary", "{OUT}/summary.json", "--draws", "3"]
    if which == 1:
        return ["setback", str(bad), "--weather", str(TMY3), "--strategies", str(EXAMPLES / "strategies.toml"),
                "--out", "{OUT}/out.csv", "--summary", "{OUT}/summary.json"]
    log = tmp_path / "log.csv"
    log.write_text(GOOD_LOG, encoding="utf-8")
    return ["simulate", str(bad), "--log", str(log), "--out", "{OUT}/out.csv"]


@pytest.mark.parametrize("k, case", list(enumerate(RESULT_CASES)), ids=[c[0] for c in RESULT_CASES])
def test_hostile_result_json(tmp_path, k, case):
    if case[1] in (DIR, MISSING) and k % 3 == 2:
        k = 0  # simulate declares the file exists=True, dir_okay=False: typer's own error
    _assert_case(tmp_path, k, case, _result_argv, "hostile_result", ".json")


# ------------------------------------------------------------------------------------------
# Fleet manifests: fleet (the manifest is checked in full before any home runs)
# ------------------------------------------------------------------------------------------

GOOD_MANIFEST_TOML = ('[defaults]\ntz = "America/New_York"\n\n[[home]]\nid = "qh-001"\nlog = "log.csv"\n'
                      'floor_area_m2 = 118\n\n[[home]]\nid = "qh-002"\nlog = "log.csv"\n')
_MH = "id,log,site,floor_area_m2,tz\n"
_MR = 'qh-001,log.csv,"45.0,-90.0",118,America/New_York\n'

MANIFEST_CASES = [(n, c, None, ".csv") for n, c, _ in GENERIC if n != "directory"] + [
    ("header_only_csv", _MH, None, ".csv"),
    ("unknown_column", "id,log,colour\nqh-001,log.csv,red\n", r"row 1, column 'colour'", ".csv"),
    ("column_twice", "id,log,log\nqh-001,log.csv,log.csv\n", r"row 1, column 'log'", ".csv"),
    ("gigantic_header", ",".join(["id", "log"] + [f"c{i}" for i in range(20_000)]) + "\n", r"row 1, column 'c0'",
     ".csv"),
    ("no_id", _MH + ',log.csv,"45.0,-90.0",118,America/New_York\n', r"row 2, column 'id'", ".csv"),
    ("no_log", _MH + 'qh-001,,"45.0,-90.0",118,America/New_York\n', r"row 2, column 'log'", ".csv"),
    ("id_twice", _MH + _MR + _MR, r"row 3, column 'id'", ".csv"),
    ("site_unquoted", _MH + "qh-001,log.csv,45.0,-90.0,118,America/New_York\n", r"row 2", ".csv"),
    ("site_off_globe", _MH + _MR.replace("45.0,-90.0", "145.0,-90.0"), r"row 2, column 'site'", ".csv"),
    ("site_formula", _MH + _MR.replace('"45.0,-90.0"', "=cmd|' /C calc'!A0"), r"row 2, column 'site'", ".csv"),
    ("floor_area_text", _MH + _MR.replace(",118,", ",huge,"), r"row 2, column 'floor_area_m2'", ".csv"),
    ("floor_area_nan", _MH + _MR.replace(",118,", ",nan,"), r"row 2, column 'floor_area_m2'", ".csv"),
    ("floor_area_1e308", _MH + _MR.replace(",118,", ",1e308,"), r"row 2, column 'floor_area_m2'", ".csv"),
    ("floor_area_negative", _MH + _MR.replace(",118,", ",-118,"), r"row 2, column 'floor_area_m2'", ".csv"),
    ("tz_unknown", _MH + _MR.replace("America/New_York", "Mars/Olympus"), r"row 2, column 'tz'", ".csv"),
    ("tz_traversal", _MH + _MR.replace("America/New_York", "../../../etc/localtime"), r"row 2, column 'tz'", ".csv"),
    ("interval_wrong", "id,log,interval\nqh-001,log.csv,middle\n", r"row 2, column 'interval'", ".csv"),
    ("partition_malformed", "id,log,partition\nqh-001,logs.parquet,home_id\n", r"row 2, column 'partition'", ".csv"),
    ("toml_truncated", GOOD_MANIFEST_TOML[:-12], None, ".toml"),
    ("toml_unknown_table", GOOD_MANIFEST_TOML + "\n[extras]\nx = 1\n", r"column 'extras'", ".toml"),
    ("toml_unknown_key", GOOD_MANIFEST_TOML + 'colour = "red"\n', r"row \d+, column 'colour'", ".toml"),
    ("toml_home_not_array", 'home = 3\n', r"column 'home'", ".toml"),
    ("toml_defaults_not_table", 'defaults = 3\n[[home]]\nid = "a"\nlog = "log.csv"\n', r"column 'defaults'",
     ".toml"),
    ("toml_id_list", GOOD_MANIFEST_TOML.replace('id = "qh-002"', 'id = ["qh", 2]'), r"row \d+, column 'id'",
     ".toml"),
    ("toml_floor_area_inf", GOOD_MANIFEST_TOML.replace("floor_area_m2 = 118", "floor_area_m2 = inf"),
     r"row \d+, column 'floor_area_m2'", ".toml"),
    ("toml_filters_nested", GOOD_MANIFEST_TOML.replace('log = "log.csv"\nfloor', 'log = "log.csv"\n'
                                                       'filters = { home_id = [1, 2] }\nfloor'),
     r"column 'filters'", ".toml"),
    ("toml_no_homes", '[defaults]\ntz = "UTC"\n', None, ".toml"),
]


def _manifest_argv(tmp_path, bad, k):
    (tmp_path / "log.csv").write_text(GOOD_LOG, encoding="utf-8")
    return ["fleet", str(bad), "--out", "{OUT}/out.parquet", "--workers", "1", "--quiet"]


@pytest.mark.parametrize("k, case", list(enumerate(MANIFEST_CASES)), ids=[c[0] for c in MANIFEST_CASES])
def test_hostile_manifest(tmp_path, k, case):
    _assert_case(tmp_path, k, case[:3], _manifest_argv, "hostile_manifest", case[3])


def test_manifest_folder_is_refused_by_the_parser(tmp_path):
    bad = _put(tmp_path / "hostile_manifest.csv", DIR)
    _check_parser(tmp_path, _manifest_argv(tmp_path, bad, 0))


# ------------------------------------------------------------------------------------------
# Formula injection reaching a CSV output comes out escaped (OWASP CSV Injection)
# ------------------------------------------------------------------------------------------

INJECTIONS = ["=cmd|' /C calc'!A0", "+SUM(1;2)", "-2+3+cmd|' /C calc'!A0", "@SUM(A1:A9)"]


def test_strategy_names_are_escaped_in_the_comparison_csv(tmp_path):
    body = ['heater = "ideal"', "[baseline]", 'name = "steady"', "constant_c = 20.0"]
    for i, text in enumerate(INJECTIONS):
        body += ["[[strategy]]", f"name = {json.dumps(text)}", f'week = {{ everyday = [["06:00", 20.0], ["22:00", {16 + i}.0]] }}']
    strategies = tmp_path / "strategies.toml"
    strategies.write_text("\n".join(body) + "\n", encoding="utf-8")
    result = write_good_result(tmp_path / "result.json")
    out = tmp_path / "comparison.csv"
    r = runner.invoke(app, ["setback", str(result), "--weather", str(TMY3), "--strategies", str(strategies),
                            "--step-s", "3600", "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    with open(out, newline="", encoding="utf-8") as handle:
        first_cells = [row[0] for row in csv.reader(handle)][1:]
    # Every name is there, each with the leading apostrophe that keeps it text in a spreadsheet.
    assert sorted(first_cells[1:]) == sorted("'" + t for t in INJECTIONS)
    assert first_cells[0] == "steady"


def test_write_csv_escapes_cells_index_and_header(tmp_path):
    import pandas as pd

    from thermorc.write import write_csv

    frame = pd.DataFrame({"note": INJECTIONS, "=HYPERLINK(\"x\")": [1, 2, 3, 4]},
                         index=pd.Index(INJECTIONS, name="name"))
    write_csv(tmp_path / "t.csv", frame)
    rows = list(csv.reader(io.StringIO((tmp_path / "t.csv").read_text(encoding="utf-8"))))
    cells = [c for row in rows for c in row]
    assert not any(c.startswith(("=", "+", "-", "@")) for c in cells), cells


# ------------------------------------------------------------------------------------------
# Paths in a manifest that leave its folder, name a folder or hold a NUL byte
# ------------------------------------------------------------------------------------------

def test_manifest_paths_out_of_the_folder_become_error_rows(tmp_path):
    # docs/fleet.md: a home's own files are not manifest errors; that home gets an error row
    # naming the file and the others run. Nothing here may crash the run or read as a log.
    import pandas as pd

    (tmp_path / "log.csv").write_text(GOOD_LOG, encoding="utf-8")
    manifest = tmp_path / "homes.toml"
    manifest.write_text(
        '[[home]]\nid = "traversal"\nlog = "../../../../../../../../../../etc/passwd"\n'
        '[[home]]\nid = "folder"\nlog = "logs/../../../../../../../../etc"\n'
        '[[home]]\nid = "nul"\nlog = "a\\u0000b.csv"\n'
        '[[home]]\nid = "=cmd|\' /C calc\'!A0"\nlog = "log.csv"\n', encoding="utf-8")
    out = tmp_path / "out" / "RESULTS.parquet"
    r = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--quiet", "--model", "1R1C"])
    assert r.exit_code == 0, r.output
    assert "Traceback" not in r.output
    rows = pd.read_parquet(out).set_index("home_id")
    assert (rows["status"] == "error").all()
    assert rows.loc["folder", "error"].startswith("etc: is a folder")
    assert "passwd" in rows.loc["traversal", "error"] and "internal" not in rows.loc["traversal", "error"]
    # The summary table is a CSV: a home id that looks like a formula must not reach it raw.
    for csv_file in out.parent.glob("*.csv"):
        for row in csv.reader(io.StringIO(csv_file.read_text(encoding="utf-8"))):
            assert not any(c.startswith(("=", "+", "@")) for c in row), row


# ------------------------------------------------------------------------------------------
# A few through a real process: the stderr a user sees is one line
# ------------------------------------------------------------------------------------------

@pytest.mark.parametrize("command, content, needle", [
    ("inspect", "\ufeff" + _log(row=3, column="heating_w", value="=cmd|' /C calc'!A0"), r"row 3, column 'heating_w'"),
    ("biot", "[air_leakage]\nach = nan\n", r"column '"),
    ("forecast", '{"model": "2R2C", "parameters": {"c_indoor_j_per_k": Infinity}}', r"column 'parameters"),
])
def test_one_line_in_a_real_process(tmp_path, command, content, needle):
    import re
    import subprocess
    import sys

    bad = tmp_path / {"inspect": "log.csv", "biot": "c.toml", "forecast": "r.json"}[command]
    bad.write_text(content, encoding="utf-8")
    out = tmp_path / "out.csv"
    out.write_bytes(b"SENTINEL\n")
    argv = {"inspect": ["inspect", str(bad), "--out", str(out)],
            "biot": ["biot", str(bad), "--out", str(out)],
            "forecast": ["forecast", str(bad), "--weather", str(TMY3), "--out", str(out)]}[command]
    proc = subprocess.run([sys.executable, "-m", "thermorc", *argv], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"thermorc: error: {bad.name}") and re.search(needle, lines[0]), lines
    assert out.read_bytes() == b"SENTINEL\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([bad.name, out.name])


# ------------------------------------------------------------------------------------------
# Parquet logs with hostile column types (written here with pyarrow through pandas)
# ------------------------------------------------------------------------------------------

def _parquet_frame(case):
    import numpy as np
    import pandas as pd

    idx = pd.date_range("2024-01-10", periods=24, freq="15min", tz="America/New_York")
    base = pd.DataFrame({"time": idx, "indoor_c": 20.0 + np.arange(24) * 0.01, "heating_w": 1000.0,
                         "outdoor_c": 2.0})
    return {
        "time_integers": lambda: base.assign(time=np.arange(24)),
        "time_text": lambda: base.assign(time=["=cmd|' /C calc'!A0"] * 24),
        "time_naive": lambda: base.assign(time=idx.tz_localize(None)),
        "time_bytes": lambda: base.assign(time=[b"\xff\x00"] * 24),
        "time_repeated": lambda: base.assign(time=[idx[0]] * 24),
        "time_1678": lambda: base.assign(time=pd.date_range("1678-01-01", periods=24, freq="15min", tz="UTC")),
        "indoor_text": lambda: base.assign(indoor_c=["warm"] * 24),
        "indoor_bool": lambda: base.assign(indoor_c=True),
        "indoor_bytes": lambda: base.assign(indoor_c=[b"\x00\xff"] * 24),
        "indoor_lists": lambda: base.assign(indoor_c=[[1.0, 2.0]] * 24),
        "heating_inf": lambda: base.assign(heating_w=np.where(np.arange(24) == 5, np.inf, 1000.0)),
        "heating_negative": lambda: base.assign(heating_w=-1.0),
        "no_indoor": lambda: base.drop(columns="indoor_c"),
    }[case]()


PARQUET_CASES = ["time_integers", "time_text", "time_naive", "time_bytes", "time_repeated", "time_1678",
                 "indoor_text", "indoor_bool", "indoor_bytes", "indoor_lists", "heating_inf", "heating_negative",
                 "no_indoor"]


@pytest.mark.parametrize("k, case", list(enumerate(PARQUET_CASES)), ids=PARQUET_CASES)
def test_hostile_parquet_log(tmp_path, k, case):
    bad = tmp_path / "hostile_log.parquet"
    _parquet_frame(case).to_parquet(bad)
    _check(tmp_path, _log_argv(tmp_path, bad, k), bad.name, True, r"column '", variants=(k % 2 == 1,))


# ------------------------------------------------------------------------------------------
# Options the parser lets through (typer's min/max pass nan and inf): the library refuses them
# ------------------------------------------------------------------------------------------

@pytest.mark.parametrize("extra, needle", [
    (["--setpoint", "nan"], r"column 'constant_c'"),
    (["--setpoint", "1e308"], r"column 'constant_c'"),
    (["--capacity-w", "inf"], r"column 'capacity_w'"),
    (["--heater", "thermostat", "--capacity-w", "9000", "--deadband-k", "inf"], r"column 'deadband_k'"),
])
def test_non_finite_forecast_options(tmp_path, extra, needle):
    result = write_good_result(tmp_path / "result.json")
    out = _outputs(tmp_path, existing=True)
    before = snapshot(out)
    r = runner.invoke(app, ["forecast", str(result), "--weather", str(TMY3), "--out", str(out / "out.csv"),
                            "--draws", "0", *extra])
    assert_one_line_error(r, "thermorc: error:", place=True, needle=needle)
    assert snapshot(out) == before
