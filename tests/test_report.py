"""Monthly report: home file, energy accounting, the report files, and the page in a real browser."""

from __future__ import annotations

import base64
import io
import math
import re
import shutil
import subprocess
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.stats

from thermorc.errors import InputError
from thermorc.report import (
    G14_THRESHOLDS,
    REPORT_CAUTIONS,
    build_report,
    daily_energy,
    expected_heating_w,
    monthly_energy_table,
    parse_home,
    parse_month,
    read_home,
    signature_ua,
    write_report,
)
from thermorc.result import CalibrationResult

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "weather_demo"


def _one_node(r=0.005, c=1.0e7, gains=300.0):
    return CalibrationResult(model="1R1C", parameters={"r_indoor_outdoor_k_per_w": r, "c_indoor_j_per_k": c,
                                                       "solar_aperture_m2": 0.0, "internal_gains_w": gains})


def _grid(days=2, step_s=300, start="2023-01-01", tz="America/Chicago"):
    return pd.date_range(start, periods=int(days * 86400 / step_s), freq=pd.Timedelta(seconds=step_s), tz=tz)


# -- energy accounting ---------------------------------------------------------------------
def test_expected_heating_is_the_steady_first_law_balance():
    # Analytic: a 1R1C held at T_sp under constant T_out needs Q = (T_sp - T_out)/R - G (first law).
    index = _grid()
    frame = pd.DataFrame({"outdoor_c": 0.0, "ghi_w_m2": 0.0, "indoor_c": 20.0, "setpoint_c": 20.0}, index=index)
    q = expected_heating_w(_one_node(), frame, "setpoint")
    assert np.allclose(q.to_numpy()[5:], 20.0 / 0.005 - 300.0, rtol=1e-9)


def test_expected_heating_matches_the_exact_zero_order_hold_step():
    # Analytic ZOH step of a 1R1C (STYLE.md section 7): T1 = T_ss(Q) + (T0 - T_ss(Q)) a with
    # a = exp(-dt/RC), so the power that lifts T0 to T1 in one step is
    # Q = ((T1 - a T0)/(1 - a) - T_out)/R - G.
    r, c, g, dt = 0.005, 1.0e7, 300.0, 300.0
    index = _grid(days=1)
    sp = np.full(len(index), 20.0)
    sp[100:] = 21.0
    frame = pd.DataFrame({"outdoor_c": -5.0, "ghi_w_m2": 0.0, "setpoint_c": sp}, index=index)
    q = expected_heating_w(_one_node(r, c, g), frame, "setpoint").to_numpy()
    a = math.exp(-dt / (r * c))
    want = ((21.0 - a * 20.0) / (1 - a) - (-5.0)) / r - g
    assert q[99] == pytest.approx(want, rel=1e-9)
    assert q[120] == pytest.approx((21.0 + 5.0) / r - g, rel=1e-9)


def test_expected_heating_never_cools():
    # A home above its target floats: the ideal heater gives zero, not negative power.
    index = _grid(days=1)
    frame = pd.DataFrame({"outdoor_c": 25.0, "ghi_w_m2": 0.0, "indoor_c": 20.0}, index=index)
    assert (expected_heating_w(_one_node(), frame, "indoor") >= 0).all()


def test_daily_energy_and_monthly_table_against_pandas():
    # Independent reference: pandas resampling of the same power series.
    rng = np.random.default_rng(3)
    index = _grid(days=59)
    heat = rng.uniform(0, 8000, len(index))
    outdoor = -5 + 5 * np.sin(np.arange(len(index)) / 288 * 2 * np.pi / 7)
    frame = pd.DataFrame({"heating_w": heat, "outdoor_c": outdoor, "indoor_c": 20.0}, index=index)
    daily = daily_energy(frame, 300.0)
    ref = (frame["heating_w"].resample("D").sum() * 300 / 3.6e6)
    assert np.allclose(daily["heating_kwh"].to_numpy(), ref.to_numpy(), rtol=1e-12)
    table = monthly_energy_table(frame, 300.0, {"indoor": frame["heating_w"] * 0.5})
    ref_month = frame["heating_w"].resample("MS").sum() * 300 / 3.6e6
    assert list(table.index) == ["2023-01", "2023-02"]
    assert np.allclose(table["metered_kwh"].to_numpy(), ref_month.to_numpy(), rtol=1e-12)
    assert np.allclose(table["ratio_indoor"], 2.0)
    # Heating degree-days, base 18 degC on daily means, worked by pandas directly.
    hdd = (18.0 - frame["outdoor_c"].resample("D").mean()).clip(lower=0).resample("MS").sum()
    assert np.allclose(table["heating_degree_days_18_k_day"].to_numpy(), hdd.to_numpy(), rtol=1e-12)
    assert table.loc["2023-02", "days"] == pytest.approx(28.0)


def test_signature_ua_is_least_squares_as_scipy_linregress():
    # Reference library: scipy.stats.linregress of daily power on the temperature difference.
    rng = np.random.default_rng(11)
    dt = rng.uniform(10, 35, 40)
    power = 180.0 * dt - 400.0 + rng.normal(0, 150, dt.size)
    daily = pd.DataFrame({"heating_kwh": power * 24 / 1000, "indoor_mean_c": 20.0, "outdoor_mean_c": 20.0 - dt})
    found = signature_ua(daily)
    ref = scipy.stats.linregress(dt, power)
    assert found["ua_w_per_k"] == pytest.approx(ref.slope, rel=1e-10)
    assert found["intercept_w"] == pytest.approx(ref.intercept, rel=1e-10)
    assert found["r2"] == pytest.approx(ref.rvalue**2, rel=1e-10)
    assert math.isnan(signature_ua(daily.iloc[:5])["ua_w_per_k"])


# -- the home file -------------------------------------------------------------------------
def test_parse_month():
    assert parse_month("2023-02") == (2023, 2)
    for bad in ("2023-13", "23-02", "2023/02", "february"):
        with pytest.raises(InputError, match="expected YYYY-MM"):
            parse_month(bad)


def test_example_home_file_reads():
    home = read_home(ROOT / "docs" / "examples" / "home.toml")
    assert home.tz == "America/Chicago" and home.site["latitude"] == pytest.approx(45.37)
    assert Path(home.log).name == "log.csv" and home.floor_area_m2 == 120.0 and home.preset == "auto"


@pytest.mark.parametrize("data, column, match", [
    ({"log": {"file": "log.csv"}, "colour": "red"}, "colour", "unknown key"),
    ({}, "log", "missing"),
    ({"log": {"file": "nowhere.csv"}}, "log.file", "no such file"),
    ({"log": {"file": "log.csv", "interval": "middle"}}, "log.interval", "expected 'start' or 'end'"),
    ({"log": {"file": "log.csv"}, "model": {"preset": "4R4C"}}, "model.preset", "expected one of"),
    ({"log": {"file": "log.csv"}, "floor_area_m2": -3}, "floor_area_m2", "out of range"),
    ({"log": {"file": "log.csv"}, "site": {"latitude": 45.0}}, "site.longitude", "both"),
    ({"log": {"file": "log.csv", "tz": "Mars/Olympus"}}, "log.tz", "time zone"),
    ({"log": {"file": "log.csv"}, "window_areas": {"S": -1}}, "window_areas", "0 m2 or more"),
    ({"log": {"file": "log.csv"}, "window_areas": "S=8,E"}, "window_areas", "FACING=AREA"),
    ({"log": {"file": "log.csv"}, "ground_c": 80, "ground_share": 0.1}, "ground_c", "not plausible"),
    ({"log": {"file": "log.csv"}, "ground_c": "8"}, "ground_c", "expected a number"),
    ({"log": {"file": "log.csv"}, "ground_c": 8, "ground_share": 0.95}, "ground_share", "outside 0..0.9"),
    ({"log": {"file": "log.csv"}, "ground_share": 0.1}, "ground_share", "needs ground_c"),
    ({"log": {"file": "log.csv"}, "ground_c": 8}, "ground_c", "needs ground_share"),
    ({"log": {"file": "log.csv"}, "model": {"gains_hours": [7, 23]}}, "model.gains_hours", "no hours"),
    ({"log": {"file": "log.csv"}, "model": {"gains": "day-night", "gains_hours": [23, 7, 12]}}, "model.gains_hours",
     "2 start hours"),
])
def test_bad_home_files_name_the_key(data, column, match):
    path = str(DEMO / "home.toml")  # not read: only its folder anchors the relative paths
    with pytest.raises(InputError, match=match) as info:
        parse_home(data, path=path)
    assert info.value.column == column


def test_window_areas_of_a_home_file_as_a_table_or_a_text():
    path = str(DEMO / "home.toml")
    table = parse_home({"log": {"file": "log.csv"}, "window_areas": {"S": 8, "E": 3, "W": 3, "N": 4}}, path=path)
    text = parse_home({"log": {"file": "log.csv"}, "window_areas": "S=8,E=3,W=3,N=4"}, path=path)
    from thermorc.chain import parse_window_areas

    assert parse_window_areas(table.window_areas) == parse_window_areas(text.window_areas)


def test_a_home_file_gives_the_households_gains_hours():
    path = str(DEMO / "home.toml")
    home = parse_home({"log": {"file": "log.csv"}, "model": {"gains": "four-period", "gains_hours": [9, 12, 20, 2]}},
                      path=path)
    assert home.gains == {"kind": "four_period", "starts_h": [9.0, 12.0, 20.0, 2.0],
                          "names": ["morning", "daytime", "evening", "night"]}
    assert parse_home({"log": {"file": "log.csv"}, "model": {"gains": "day-night"}}, path=path).gains == "day_night"


# -- the whole report on the invented demo home ----------------------------------------------
@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    home = parse_home({
        "name": "27 Larchmere Row, Quillhaven (invented)", "floor_area_m2": 120.0,
        "log": {"file": str(DEMO / "log.csv"), "tz": "America/Chicago"}, "weather": str(DEMO / "weather.csv"),
        "site": str(DEMO / "site.toml"), "construction": str(DEMO / "construction.toml"),
        "strategies": str(ROOT / "docs" / "examples" / "strategies.toml"), "model": {"preset": "1R1C"},
    }, path=str(DEMO / "home.toml"))
    with pytest.warns(Warning):  # a 1R1C on this log draws model warnings; they go into the report
        rep = build_report(home, "2023-02")
    out = tmp_path_factory.mktemp("report")
    paths = write_report(rep, out, pdf=True)
    return rep, out, paths


def test_report_files_and_self_contained_html(demo_report):
    rep, out, paths = demo_report
    page = Path(paths[0]).read_text(encoding="utf-8")
    assert paths[0].endswith("report-2023-02.html") and paths[-1].endswith(".pdf")
    assert Path(paths[-1]).read_bytes()[:5] == b"%PDF-"
    # Self-contained: no scripts, and every src/href is inline data.
    assert "<script" not in page.lower()
    refs = re.findall(r"""(?:src|href)\s*=\s*['"]([^'"]*)['"]""", page)
    assert refs and all(r.startswith("data:") for r in refs)
    images = re.findall(r"data:image/png;base64,([A-Za-z0-9+/=]+)", page)
    assert len(images) == len(rep.figures) == 4
    assert all(base64.b64decode(img)[:8] == b"\x89PNG\r\n\x1a\n" for img in images)
    for title in ("Data quality", "Calibrated model", "Residual diagnostics", "Energy signature",
                  "Setback strategies", "Construction and the Biot check", "Cautions"):
        assert f">{title}</h2>" in page
    for name in ("parameters", "guideline14", "monthly-energy", "setback", "biot"):
        assert (out / f"report-2023-02-{name}.csv").is_file()
    for caution in REPORT_CAUTIONS:
        assert caution.split(" (")[0][:60] in page.replace("&#x27;", "'")


def test_report_guideline14_thresholds(demo_report):
    # ASHRAE Guideline 14-2014 (check-values.md 1.1, VERIFIED secondary): hourly CV(RMSE) 30 %,
    # NMBE +-10 %; monthly 15 %, +-5 %.
    assert G14_THRESHOLDS == {"hourly": {"cv_rmse_pct": 30.0, "nmbe_pct": 10.0},
                              "monthly": {"cv_rmse_pct": 15.0, "nmbe_pct": 5.0}}
    g14 = demo_report[0].tables["guideline14"]
    assert g14.loc["hourly", "cv_rmse_limit_pct"] == 30.0 and g14.loc["monthly", "nmbe_limit_pct"] == 5.0
    # Two months of data cannot carry monthly metrics for more than one parameter (n > p).
    assert g14.loc["monthly", "meets"] == "n/a"


def test_report_energy_agrees_with_the_log(demo_report):
    rep = demo_report[0]
    log = pd.read_csv(DEMO / "log.csv")
    stamps = pd.to_datetime(log["time"], utc=True).dt.tz_convert("America/Chicago")
    feb = (stamps.dt.month == 2).to_numpy()
    metered = log.loc[feb, "heating_w"].sum() * 300 / 3.6e6
    assert rep.facts["metered_kwh"] == pytest.approx(metered, rel=1e-9)
    assert list(rep.tables["monthly_energy"].index) == ["2023-01", "2023-02"]
    # The invented home's fine model has UA 201 W/K (truth.json); the signature, a cross-check,
    # lands within a third of it.
    assert 130 < rep.facts["signature_ua_w_per_k"] < 270


def test_report_month_outside_the_log():
    home = parse_home({"log": {"file": str(DEMO / "log.csv"), "tz": "America/Chicago"},
                       "weather": str(DEMO / "weather.csv")}, path=str(DEMO / "home.toml"))
    with pytest.raises(InputError, match="not in the log"):
        build_report(home, "2023-07", result=_one_node())


# -- the page in a real browser --------------------------------------------------------------
def _chromium(url, shot, user_dir, size="1280,2000"):
    cmd = ["chromium", "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={user_dir}", f"--screenshot={shot}", f"--window-size={size}",
           "--enable-logging=stderr", "--v=0", url]
    run = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    console = [line for line in run.stderr.splitlines() if ":CONSOLE" in line]
    return run.returncode, console


def _blank(png_path):
    from PIL import Image

    pixels = np.asarray(Image.open(png_path).convert("L"), dtype=float)
    # A blank page is one colour; a report has text, tables and figures.
    return float(pixels.std()) < 5.0 or len(np.unique(pixels)) < 16


@pytest.mark.skipif(shutil.which("chromium") is None, reason="chromium is not installed (Debian package 'chromium')")
def test_report_renders_in_headless_chromium(demo_report, tmp_path):
    # Controls first, so the checks can fail: a page with a console error, and a blank page.
    bad = tmp_path / "bad.html"
    bad.write_text("<!DOCTYPE html><html><head><link rel='icon' href='data:,'></head><body>"
                   "<script>console.error('control error')</script></body></html>", encoding="utf-8")
    code, console = _chromium(bad.as_uri(), tmp_path / "bad.png", tmp_path / "profile-bad", "400,300")
    assert code == 0 and any("control error" in line for line in console)
    assert _blank(tmp_path / "bad.png")
    shot = tmp_path / "report.png"
    code, console = _chromium(Path(demo_report[2][0]).as_uri(), shot, tmp_path / "profile")
    assert code == 0 and shot.is_file()
    assert console == []
    assert not _blank(shot)


def test_no_half_written_report_after_a_failure(demo_report, tmp_path, monkeypatch):
    import thermorc.report as report_module

    def broken(report):
        raise RuntimeError("disk full")

    monkeypatch.setattr(report_module, "render_pdf", broken)
    with pytest.raises(RuntimeError):
        write_report(demo_report[0], tmp_path / "out", pdf=True)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_report_summary_png_is_readable(demo_report):
    from PIL import Image

    caption, fig = demo_report[0].figures["signature"]
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    assert Image.open(io.BytesIO(buffer.getvalue())).size[0] > 300
    assert "[kWh/day]" in fig.axes[0].get_ylabel() and "[°C]" in fig.axes[0].get_xlabel()


def test_every_quantity_of_the_parameter_table_has_its_si_unit():
    # Units from the names' SI suffixes (DEVELOPERS.md: the unit in the name), the sensor lag
    # included; "-" only for the unitless share.
    from thermorc.report import _parameter_table
    from thermorc.result import CalibrationResult

    result = CalibrationResult(
        model="2R2C",
        parameters={"r_indoor_envelope_k_per_w": 0.001, "r_envelope_outdoor_k_per_w": 0.005, "c_indoor_j_per_k": 2e6,
                    "c_envelope_j_per_k": 3e7, "solar_aperture_m2": 2.0, "solar_to_envelope_share": 0.3,
                    "internal_gains_w": 250.0, "sensor_time_constant_s": 300.0},
        heat_loss_coefficient_w_per_k=166.7, time_constants_h=[44.0, 0.5], capacitance_j_per_k=3.2e7,
    )
    table = _parameter_table(result).set_index("key")
    assert table.loc["sensor_time_constant_s", "unit"] == "s"
    assert (table.drop(index="solar_to_envelope_share")["unit"] != "-").all()


def test_report_shows_the_held_out_validation_and_the_heating_share():
    # A result calibrated with the last week kept back: the report's fit section gives the
    # validation figures RESULT.json holds, and the heating share of the fitted period.
    from thermorc.chain import calibrate_files
    from thermorc.report import render_html

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = calibrate_files(DEMO / "log.csv", tz="America/Chicago", weather=DEMO / "weather.csv",
                                 model="2R2C", test_days=7)
        home = parse_home({"log": {"file": str(DEMO / "log.csv"), "tz": "America/Chicago"},
                           "weather": str(DEMO / "weather.csv"), "site": str(DEMO / "site.toml")},
                          path=str(DEMO / "home.toml"))
        page = render_html(build_report(home, "2023-02", result=result))
    v = result.extras["validation"]
    assert "Validation on days the fit did not see" in page
    assert f"RMSE {v['rmse_k']:.2f} K" in page and f"bias {v['bias_k']:.2f} K" in page
    assert f"supplied {100 * result.extras['heating_share']:.0f} % of the heat" in page


@pytest.mark.parametrize("ground, key", [({"ground_c": 80, "ground_share": 0.1}, "ground_c"),
                                        ({"ground_c": 8, "ground_share": 0.95}, "ground_share")])
def test_ground_keys_of_a_home_file_are_named_as_keys_not_options(ground, key):
    with pytest.raises(InputError) as info:
        parse_home({"log": {"file": "log.csv"}, **ground}, path=str(DEMO / "home.toml"))
    assert f"({key})" in info.value.message and "--ground" not in info.value.message
