"""Log and weather readers: formats, column maps, DST, and every bad input of the contract."""

import pathlib

import numpy as np
import pandas as pd
import pvlib
import pytest

from thermorc import units
from thermorc.errors import InputError
from thermorc.read import load_column_map, read_log, read_weather

DATA = pathlib.Path(__file__).parent / "data"
TMY3 = pathlib.Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"  # real open data shipped by pvlib


def write(tmp_path, text, name="log.csv", mode="w"):
    path = tmp_path / name
    if mode == "wb":
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


GOOD = (
    "time,indoor_c,heating_w,outdoor_c\n"
    "2024-01-10T00:00-05:00,20.0,1000,2.0\n"
    "2024-01-10T00:15-05:00,20.1,0,2.0\n"
    "2024-01-10T00:30-05:00,20.2,500,1.5\n"
    "2024-01-10T00:45-05:00,20.3,500,1.5\n"
)


def test_canonical_csv_reads_with_offsets_and_interval_start_labels(tmp_path):
    data, meta = read_log(write(tmp_path, GOOD))
    assert list(data.columns) == ["indoor_c", "heating_w", "outdoor_c"]
    assert str(data.index[0]) == "2024-01-10 00:00:00-05:00"
    assert data.index.is_monotonic_increasing and data.index.is_unique
    assert meta["median_step_s"] == 900.0
    assert meta["interval"] == "start"


def test_interval_ending_power_is_relabelled_to_interval_start(tmp_path):
    data, _ = read_log(write(tmp_path, GOOD), interval="end")
    # The value stamped 00:15 is the mean over 00:00-00:15, so it now sits at 00:00.
    assert data["heating_w"].tolist()[:3] == [0.0, 500.0, 500.0]
    assert np.isnan(data["heating_w"].iloc[-1])
    assert data["indoor_c"].iloc[0] == 20.0  # temperatures are instants, never shifted


def test_column_map_units_stages_and_cop(tmp_path):
    data, meta = read_log(DATA / "invented_logger.csv", DATA / "invented_logger_map.toml")
    # degF -> degC: (t - 32) / 1.8 (NIST SP 811, B.8).
    assert data["indoor_c"].iloc[0] == pytest.approx(20.0)
    assert data["outdoor_c"].iloc[0] == pytest.approx(0.0)
    # Stage 1 ran the full 300 s: 40 000 Btu_IT/h x 0.29307107 W per Btu_IT/h (NIST SP 811,
    # B.9) x efficiency 0.95; the heat pump drew nothing.
    assert data["heating_w"].iloc[0] == pytest.approx(40000 * 0.29307107 * 0.95)
    # Half the interval on stage 1, plus 1 kW electric at COP 3.0 (the table at 0 degC).
    assert data["heating_w"].iloc[1] == pytest.approx(0.5 * 40000 * 0.29307107 * 0.95 + 3000.0)
    # 31.1 degF = -0.5 degC -> COP 2.95 on the linear table.
    assert data["heating_w"].iloc[2] == pytest.approx(1000.0 * (3.0 - 0.05 * 1.0))
    assert str(data.index.tz) == "America/New_York"
    assert any("columns not used" in n for n in meta["notes"])  # the Note column is never evaluated


def test_column_map_as_dict_and_decimal_comma(tmp_path):
    text = "t;in;q\n2024-01-10 00:00;20,5;1,5\n2024-01-10 01:00;20,6;0\n2024-01-10 02:00;20,4;1\n"
    cmap = {"time": {"column": "t", "tz": "Europe/Paris"}, "file": {"delimiter": ";", "decimal": ","},
            "columns": {"indoor_c": "in", "heating_w": {"column": "q", "unit": "kW"}}}
    data, _ = read_log(write(tmp_path, text), cmap)
    assert data["indoor_c"].iloc[0] == 20.5
    assert data["heating_w"].iloc[0] == 1500.0
    assert data.index[0].utcoffset() == pd.Timedelta(hours=1)


def test_unit_factors_match_nist_sp811():
    # NIST SP 811 (2008) Appendix B.9: Btu_IT/h -> W 2.930 711 E-01; ton of refrigeration
    # (12 000 Btu_IT/h) -> W 3.516 853 E+03.
    assert units.power_factor_w("Btu/h") == pytest.approx(0.2930711, rel=2e-7)  # 7 digits in the table
    assert units.power_factor_w("ton") == pytest.approx(3516.853, rel=1e-6)
    assert units.power_factor_w("kBtu/h") == pytest.approx(293.0711, rel=2e-7)
    # B.8: 212 degF = 100 degC; 32 degF = 0 degC; 273.15 K = 0 degC.
    assert units.to_celsius(np.array([212.0, 32.0, -40.0]), "degF") == pytest.approx([100.0, 0.0, -40.0])
    assert units.to_celsius(273.15, "K") == pytest.approx(0.0)
    assert units.runtime_to_fraction([150.0], "s", 300.0)[0] == 0.5
    assert units.runtime_to_fraction([2.5], "min", 300.0)[0] == 0.5
    assert units.runtime_to_fraction([50.0], "percent", 300.0)[0] == 0.5


def test_parquet_and_excel_read_the_same_as_csv(tmp_path):
    csv_data, _ = read_log(write(tmp_path, GOOD))
    frame = pd.read_csv(write(tmp_path, GOOD, "copy.csv"))
    pq = tmp_path / "log.parquet"
    frame.to_parquet(pq)
    xl = tmp_path / "log.xlsx"
    frame.to_excel(xl, index=False)
    for path in (pq, xl):
        data, meta = read_log(path)
        pd.testing.assert_frame_equal(data, csv_data, check_freq=False, check_index_type=False)
    assert meta["source_format"] == "excel"


# -- daylight saving: both changeover days (America/New_York, 2024: clocks go forward on
# 10 March at 02:00 and back on 3 November at 02:00; US Energy Policy Act of 2005, sec. 110).

def _naive_log(times):
    rows = "\n".join(f"{t},20.{i % 10},{(i % 2) * 1000}" for i, t in enumerate(times))
    return "time,indoor_c,heating_w\n" + rows + "\n"


def test_spring_forward_day_has_no_gap_and_keeps_every_row(tmp_path):
    wall = pd.date_range("2024-03-10 00:00", "2024-03-10 04:00", freq="15min")
    wall = wall[(wall.hour != 2)]  # the wall clock skips 02:00-02:59
    data, meta = read_log(write(tmp_path, _naive_log(wall.strftime("%Y-%m-%d %H:%M"))), tz="America/New_York")
    assert len(data) == len(wall)
    steps = np.diff(data.index.asi8) / 1e9
    assert set(steps) == {900.0}  # 01:45 EST -> 03:00 EDT is 15 real minutes
    assert any("went forward" in n for n in meta["notes"])


def test_fall_back_day_keeps_both_passes_of_the_repeated_hour(tmp_path):
    first = pd.date_range("2024-11-03 00:00", "2024-11-03 01:45", freq="15min")
    again = pd.date_range("2024-11-03 01:00", "2024-11-03 03:00", freq="15min")
    wall = first.append(again)
    data, meta = read_log(write(tmp_path, _naive_log(wall.strftime("%Y-%m-%d %H:%M"))), tz="America/New_York")
    assert len(data) == len(wall)  # nothing dropped
    assert data.index.is_unique and data.index.is_monotonic_increasing
    assert set(np.diff(data.index.asi8) / 1e9) == {900.0}
    assert data.index[4].utcoffset() == pd.Timedelta(hours=-4)  # first 01:00 is EDT
    assert data.index[8].utcoffset() == pd.Timedelta(hours=-5)  # second 01:00 is EST
    assert any("repeated hour" in n for n in meta["notes"])


def test_fall_back_hour_written_once_is_refused_with_a_hint(tmp_path):
    wall = pd.date_range("2024-11-03 00:00", "2024-11-03 03:00", freq="30min")
    with pytest.raises(InputError, match="does not repeat.*ambiguous = 'earlier' or 'later'") as exc:
        read_log(write(tmp_path, _naive_log(wall.strftime("%Y-%m-%d %H:%M"))), tz="America/New_York")
    assert exc.value.row == 4
    data, _ = read_log(tmp_path / "log.csv", tz="America/New_York", ambiguous="later")
    assert data.index[2].utcoffset() == pd.Timedelta(hours=-5)


def test_time_inside_the_skipped_spring_hour_is_refused(tmp_path):
    wall = ["2024-03-10 01:30", "2024-03-10 02:30", "2024-03-10 03:30", "2024-03-10 04:30"]
    with pytest.raises(InputError, match="does not exist in America/New_York") as exc:
        read_log(write(tmp_path, _naive_log(wall)), tz="America/New_York")
    assert exc.value.row == 3 and exc.value.column == "time"


# -- bad input: one test each; the message names the file, row and column ----------------------

@pytest.mark.parametrize(
    "text, match, row, column",
    [
        ("", "file is empty", None, None),
        ("time,indoor_c,heating_w\n", "no data rows", 1, None),
        ("time,indoor_c\n2024-01-10T00:00Z,20\n", "missing required column", 1, "heating_w"),
        (GOOD.replace("20.2,500", "abc,500"), "'abc' is not a number", 4, "indoor_c"),
        (GOOD.replace("20.2,500", "=1+1,500"), "'=1\\+1' is not a number", 4, "indoor_c"),
        (GOOD.replace("T00:30", "T00:05"), "earlier than the row above", 4, "time"),
        (GOOD.replace("T00:30-05:00,20.2", "T00:15-05:00,20.9"), "repeats row 3 with a different value", 4,
         "time"),
        (GOOD.replace("T00:30-05:00", "T00:30"), "has no UTC offset, unlike the first row", 4, "time"),
        (GOOD.replace("2024-01-10T00:30", "1700-01-10T00:30"), "year 1700 is outside", 4, "time"),
        (GOOD.replace("2024-01-10T00:30", "2300-01-10T00:30"), "year 2300 is outside", 4, "time"),
        (GOOD.replace("20.2,500", "20.2,-350"), "-350 W is negative", 4, "heating_w"),
        (GOOD.replace("20.2,500", "20.2,1e308"), "outside the plausible range", 4, "heating_w"),
        (GOOD.replace("20.2,500", "20.2,inf"), "not a finite number", 4, "heating_w"),
        (GOOD.replace(",2.0\n", ",\n").replace(",1.5\n", ",\n"), "has no values", None, "outdoor_c"),
        ("time,indoor_c,heating_w\n2024-01-10T00:00Z,20,1\n2024-01-10T01:00Z,20,1\n", "only 2 distinct times",
         None, None),
        ("time,indoor_c,heating_w\n2024-01-10 00:00,20,1\n2024-01-10 01:00,20,1\n2024-01-10 02:00,20,1\n",
         "times have no UTC offset", 2, "time"),
        (GOOD.replace("20.1,0,2.0", "20.1,0,2.0,7"), "5 fields \\(expected 4", 3, None),
    ],
)
def test_bad_log_is_refused_with_its_location(tmp_path, text, match, row, column):
    path = write(tmp_path, text)
    with pytest.raises(InputError, match=match) as exc:
        read_log(path)
    assert exc.value.path == str(path)
    assert exc.value.row == row
    assert exc.value.column == column
    assert "\n" not in str(exc.value)


def test_indoor_in_degf_declared_degc_is_refused_with_a_hint(tmp_path):
    text = GOOD.replace("20.0,", "68.0,").replace("20.1,", "68.2,").replace("20.2,", "68.4,").replace("20.3,", "68.5,")
    with pytest.raises(InputError, match="look like degF.*unit = 'degF'") as exc:
        read_log(write(tmp_path, text))
    assert exc.value.row == 2 and exc.value.column == "indoor_c"


@pytest.mark.parametrize(
    "content, match",
    [
        ("time,indoor_c\n".encode("utf-16"), "UTF-16"),
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary"),
        (b"time,indoor_c,heating_w\n2024-01-10T00:00Z,20\xff,1\n", "cannot be decoded"),
        (b"   \n\n", "file is empty"),
    ],
)
def test_undecodable_files_are_refused(tmp_path, content, match):
    with pytest.raises(InputError, match=match):
        read_log(write(tmp_path, content, mode="wb"))


def test_directory_and_missing_file_are_refused(tmp_path):
    with pytest.raises(InputError, match="is a directory"):
        read_log(tmp_path)
    with pytest.raises(InputError, match="no such file"):
        read_log(tmp_path / "nope.csv")


def test_damaged_parquet_and_excel_are_refused(tmp_path):
    with pytest.raises(InputError, match="not a Parquet file"):
        read_log(write(tmp_path, GOOD, "log.parquet"))
    with pytest.raises(InputError, match="Excel workbook"):
        read_log(write(tmp_path, GOOD, "log.xlsx"))


def test_duplicate_policies(tmp_path):
    exact = GOOD + "2024-01-10T00:45-05:00,20.3,500,1.5\n"
    data, meta = read_log(write(tmp_path, exact))
    assert len(data) == 4 and any("exactly" in n for n in meta["notes"])
    conflict = GOOD + "2024-01-10T00:45-05:00,20.5,700,1.5\n"
    data, _ = read_log(write(tmp_path, conflict), duplicates="mean")
    assert data["indoor_c"].iloc[-1] == pytest.approx(20.4)
    data, _ = read_log(write(tmp_path, GOOD.replace("T00:30", "T00:05")), sort=True)
    assert data.index.is_monotonic_increasing


@pytest.mark.parametrize(
    "spec, match, column",
    [
        ({"colums": {}}, "unknown section", "colums"),
        ({"time": {"zone": "UTC"}}, "unknown key", "time.zone"),
        ({"time": {"tz": "Mars/Olympus"}}, "unknown time zone", None),
        ({"columns": {"indoor_c": {"column": "x", "unit": "Rankine"}}}, "unknown unit", "columns.indoor_c.unit"),
        ({"heating": [{"column": "r", "runtime": "s"}]}, "needs 'rating'", "heating[0].rating"),
        ({"heating": [{"column": "r", "cop": [[0, -1]]}]}, "COP values", "heating[0].cop"),
    ],
)
def test_bad_column_map_is_refused(spec, match, column):
    with pytest.raises(InputError, match=match) as exc:
        load_column_map(spec)
    assert exc.value.column == column


def test_bad_toml_names_its_line(tmp_path):
    path = write(tmp_path, "[time]\ncolumn = \n", "map.toml")
    with pytest.raises(InputError, match="not valid TOML") as exc:
        load_column_map(path)
    assert exc.value.row == 2


def test_runtime_longer_than_interval_is_refused(tmp_path):
    text = DATA.joinpath("invented_logger.csv").read_text().replace(";300;", ";900;")
    with pytest.raises(InputError, match="longer than the 300 s interval") as exc:
        read_log(write(tmp_path, text), DATA / "invented_logger_map.toml")
    assert exc.value.row == 2 and exc.value.column == "Stage 1 run (s)"


# -- weather ------------------------------------------------------------------------------------

def test_tmy3_first_stamp_and_known_noon_value():
    data, meta = read_weather(TMY3)
    # read_tmy3 stamps hour-ending (first row 01:00); ours start at 00:00 (pvlib read_tmy3 docs).
    assert str(data.index[0]) == "1990-01-01 00:00:00-05:00"
    assert len(data) == 8760 and data.index.is_monotonic_increasing
    raw, _ = pvlib.iotools.read_tmy3(TMY3, coerce_year=1990)
    # The hour ending 13:00 on 15 January (raw) is the interval starting 12:00 (ours).
    assert data.loc["1990-01-15 12:00", "ghi_w_m2"] == raw.loc["1990-01-15 13:00", "ghi"] == 578
    # Temperature is a reading at its stamp: kept at 13:00.
    assert data.loc["1990-01-15 13:00", "outdoor_c"] == raw.loc["1990-01-15 13:00", "temp_air"]
    # Station metadata as in check-values section 7 (read with pvlib).
    assert meta["latitude"] == 36.1 and meta["longitude"] == -79.95 and meta["altitude_m"] == 273.0
    assert meta["name"] == "GREENSBORO PIEDMONT TRIAD INT"
    assert any("coerced to 1990" in n for n in meta["notes"])


def _epw_from_tmy3(path):
    raw, meta = pvlib.iotools.read_tmy3(TMY3, coerce_year=1990)
    start = raw.index - pd.Timedelta(hours=1)
    lines = ["LOCATION,Marrowby (invented),NC,USA,invented,000000,36.1,-79.95,-5.0,273.0"]
    lines += ["DESIGN CONDITIONS,0", "TYPICAL/EXTREME PERIODS,0", "GROUND TEMPERATURES,0",
              "HOLIDAYS/DAYLIGHT SAVINGS,No,0,0,0", "COMMENTS 1,invented test file",
              "COMMENTS 2,values copied from pvlib's 723170TYA.CSV", "DATA PERIODS,1,1,Data,Sunday, 1/ 1,12/31"]
    for t, (_, r) in zip(start, raw.iterrows()):
        year = 1988 if t.month == 1 else 1996
        fields = [year, t.month, t.day, t.hour + 1, 60, "?", r.temp_air, r.temp_dew, r.relative_humidity,
                  r.pressure * 100, 0, 0, 0, r.ghi, r.dni, r.dhi, 0, 0, 0, 0, r.wind_direction, r.wind_speed,
                  0, 0, 99, 9999, 9, 999999999, 0, 0, 0, 88, 0, 0, 0]
        lines.append(",".join(str(f) for f in fields))
    path.write_text("\n".join(lines) + "\n")
    return raw


def test_epw_first_stamp_and_same_values_as_tmy3(tmp_path):
    raw = _epw_from_tmy3(tmp_path / "marrowby.epw")
    data, meta = read_weather(tmp_path / "marrowby.epw")
    tmy, _ = read_weather(TMY3)
    # EPW hour 1 is the hour ending 01:00; read_epw labels it 00:00 (pvlib read_epw docs).
    assert str(data.index[0]) == "1990-01-01 00:00:00-05:00"
    assert meta["source_format"] == "epw" and meta["latitude"] == 36.1
    np.testing.assert_allclose(data["ghi_w_m2"], tmy["ghi_w_m2"])
    np.testing.assert_allclose(data["outdoor_c"], tmy["outdoor_c"])
    assert any("several years (1988-1996)" in n for n in meta["notes"])
    del raw


def test_canonical_weather_csv_with_site_comments(tmp_path):
    text = ("# latitude = 36.1\n# longitude = -79.95\n# name = Marrowby (invented)\n"
            "time,outdoor_c,ghi_w_m2,wind_m_s\n"
            "2024-01-10T00:00-05:00,1.0,0,2\n2024-01-10T01:00-05:00,0.5,0,3\n")
    data, meta = read_weather(write(tmp_path, text, "weather.csv"))
    assert meta["latitude"] == 36.1 and meta["name"] == "Marrowby (invented)"
    assert list(data.columns) == ["outdoor_c", "ghi_w_m2", "wind_m_s"]
    with pytest.raises(InputError, match="missing required column") as exc:
        read_weather(write(tmp_path, "time,outdoor_c\n2024-01-10T00:00Z,1\n", "w2.csv"))
    assert exc.value.column == "ghi_w_m2"


@pytest.mark.parametrize("times, tz, row, year", [
    # Naive local times are judged by their own year, times with an offset by their UTC year:
    # 2100-12-31 19:00 at UTC-05:00 is 2101-01-01 00:00 UTC.
    (["1970-01-01 01:00", "1969-12-31 23:30", "1970-01-01 02:00"], "America/New_York", 3, 1969),
    (["2100-12-31T17:00-05:00", "2100-12-31T18:00-05:00", "2100-12-31T19:00-05:00"], None, 4, 2101),
])
def test_a_year_outside_the_plausible_span_is_refused_near_its_edge(tmp_path, times, tz, row, year):
    # The span 1970-2100 is thermorc's own limit (common practice, thermorc.read.YEAR_MIN/MAX).
    text = "time,indoor_c,heating_w\n" + "".join(f"{t},20.0,100\n" for t in times)
    with pytest.raises(InputError) as info:
        read_log(write(tmp_path, text), tz=tz)
    assert str(info.value) == f"log.csv, row {row}, column 'time': year {year} is outside 1970-2100 (expected a real logging date)"
    inside = "time,indoor_c,heating_w\n" + "".join(f"2100-12-31T{h}:00+00:00,20.0,100\n" for h in (21, 22, 23))
    assert read_log(write(tmp_path, inside, "inside.csv"))[0].index[-1].year == 2100


def test_a_table_already_read_gives_what_the_parquet_file_gives(tmp_path):
    # Reference: the same cells written with pandas.DataFrame.to_parquet and read from the file.
    idx = pd.date_range("2024-01-10", periods=8, freq="15min", tz="America/Chicago")
    cells = pd.DataFrame({"time": idx, "indoor_c": np.linspace(19, 21, 8), "heating_w": [0.0, 900] * 4})
    cells.to_parquet(tmp_path / "log.parquet", index=False)
    data, meta = read_log(tmp_path / "log.parquet")
    again, meta2 = read_log("dataset[home_id=7]", table=cells)
    pd.testing.assert_frame_equal(again, data, check_exact=True)
    assert meta2["source_format"] == "parquet" and meta2["path"] == "dataset[home_id=7]"
    cells.loc[3, "heating_w"] = -5.0
    with pytest.raises(InputError, match=r"^dataset\[home_id=7\], row 5, column 'heating_w': -5 W is negative"):
        read_log("dataset[home_id=7]", table=cells)
