"""Façade weights of the solar input from a construction's windows, end to end."""

import json
import sys
import tomllib
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from thermorc import chain, forecast
from thermorc.construction import parse_construction, window_facade_weights
from thermorc.result import CalibrationResult

sys.path.insert(0, str(Path(__file__).parent))
from test_ground import insulated_element  # noqa: E402
from test_solar import ALT, LAT, LON, TMY3  # noqa: E402

# An invented box (no real building): windows NE and S with g-values, and a roof light.
BOX = (
    'name = "window-weight box (invented)"\nfloor_area_m2 = 60.0\n[air_leakage]\nach = 0.5\nvolume_m3 = 150.0\n'
    + insulated_element("wall", "external_wall", 90.0, 0.12)
) + """
[[elements]]
name = "north-east window"
kind = "window"
area_m2 = 2.0
orientation = "NE"
u_value_w_m2k = 1.4
g_value = 0.5
[[elements]]
name = "south window"
kind = "window"
area_m2 = 4.0
orientation = 180
u_value_w_m2k = 1.4
g_value = 0.6
[[elements]]
name = "roof light"
kind = "window"
area_m2 = 1.0
orientation = "horizontal"
u_value_w_m2k = 1.4
g_value = 0.6
"""


def test_weights_share_g_times_area_between_the_facades():
    # Worked by hand: g A is 1.0 m2 at NE (half to N, half to E) and 2.4 m2 at S; the roof
    # light is not on a vertical wall. Weights are four times each façade's share.
    weights = window_facade_weights(parse_construction(tomllib.loads(BOX)))
    assert weights == pytest.approx({"n": 4 * 0.5 / 3.4, "e": 4 * 0.5 / 3.4, "s": 4 * 2.4 / 3.4, "w": 0.0})
    assert sum(weights.values()) == pytest.approx(4.0)


def test_weighted_vertical_input_is_the_weighted_pvlib_sum():
    # Reference: pvlib.irradiance.get_total_irradiance (isotropic sky, albedo 0.2 as in
    # thermorc.solar) on each vertical façade, for one day of pvlib's real Greensboro TMY3.
    from thermorc.read import read_weather

    w, _ = read_weather(TMY3)
    day = w.loc["1990-01-15 00:00":"1990-01-15 23:00"]
    site = {"latitude": LAT, "longitude": LON, "altitude_m": ALT}
    weights = {"n": 0.5, "e": 0.25, "s": 3.0, "w": 0.25}
    got = chain.vertical_irradiance(day, site, day, weights=weights)
    plain = chain.vertical_irradiance(day, site, day)
    times = day.index + pd.Timedelta(minutes=30)
    sun = pvlib.solarposition.get_solarposition(times, LAT, LON, ALT)
    ref = np.zeros(len(day))
    for face, azimuth in zip("nesw", (0, 90, 180, 270)):
        poa = pvlib.irradiance.get_total_irradiance(90, azimuth, sun["apparent_zenith"].to_numpy(), sun["azimuth"].to_numpy(),
                                                    day["dni_w_m2"].to_numpy(), day["ghi_w_m2"].to_numpy(),
                                                    day["dhi_w_m2"].to_numpy(), albedo=0.2)["poa_global"]
        ref += weights[face] * np.nan_to_num(np.asarray(poa, dtype=float))
    np.testing.assert_allclose(got, ref, rtol=1e-6, atol=1e-6)
    assert not np.allclose(got, plain)


def test_calibration_with_a_construction_keeps_the_weights_for_forecasts(tmp_path):
    # The demo home's construction has windows on four façades: the calibration uses their
    # weights, RESULT.json keeps them, and a forecast rebuilds the same weighted input.
    demo = Path(__file__).parents[1] / "weather_demo"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = chain.calibrate_files(demo / "log.csv", tz="America/Chicago", weather=demo / "weather.csv",
                                       construction=demo / "construction.toml", model="2R2C")
    from thermorc.construction import read_construction

    assert result.solar_weights == pytest.approx(window_facade_weights(read_construction(demo / "construction.toml")))
    again = CalibrationResult.from_dict(json.loads(json.dumps(result.to_dict(), default=str)))
    assert again.solar_weights == result.solar_weights
    from thermorc.read import read_weather

    weather = read_weather(demo / "weather.csv")[0].iloc[:48]
    inputs = forecast.model_inputs(again, weather, step_s=3600.0)
    expected = chain.vertical_irradiance(weather, again.site, weather, weights=again.solar_weights)
    np.testing.assert_allclose(inputs["solar_w_m2"].to_numpy(), expected, rtol=1e-9, atol=1e-9)


def test_a_window_without_g_value_counts_with_the_mean_of_the_others():
    # Worked by hand: the NE window's g (0.5) dropped, it takes the mean of the given ones
    # (0.6, the south window's): g A is 1.2 at NE and 2.4 at S.
    weights = window_facade_weights(parse_construction(tomllib.loads(BOX.replace("g_value = 0.5\n", "", 1))))
    assert weights == pytest.approx({"n": 4 * 0.6 / 3.6, "e": 4 * 0.6 / 3.6, "s": 4 * 2.4 / 3.6, "w": 0.0})


def test_window_areas_from_the_command_line_weight_like_the_hand_worked_shares():
    # Worked by hand: 8 + 3 + 3 + 4 = 18 m2, each façade's weight is 4 x its share.
    assert chain.parse_window_areas("S=8,E=3,W=3,N=4") == pytest.approx(
        {"n": 16 / 18, "e": 12 / 18, "s": 32 / 18, "w": 12 / 18})
    # A window at SE is shared half and half; one at azimuth 200 deg goes 20/90 of the way
    # from south to west; windows of one façade add up.
    assert chain.parse_window_areas("se=2, 200=9, S=1") == pytest.approx(
        {"n": 0.0, "e": 4 * 1 / 12, "s": 4 * (1 + 7 + 1) / 12, "w": 4 * 2 / 12})


@pytest.mark.parametrize("text", ["S=8,E", "S=-1", "X=3", "S=0,N=0", "S=nan", "S=inf", ""])
def test_bad_window_areas_are_refused_before_the_log_is_read(text):
    from thermorc.errors import InputError

    with pytest.raises(InputError, match="window-areas"):
        chain.calibrate_files("no-such-log.csv", window_areas=text)


def test_calibration_with_window_areas_keeps_their_weights(tmp_path):
    # The demo home: the window areas given on the command line weight the solar input in
    # place of the plain sum, and RESULT.json keeps them for simulate and forecast.
    from typer.testing import CliRunner

    from thermorc.cli import app

    demo = Path(__file__).parents[1] / "weather_demo"
    out = tmp_path / "r.json"
    run = CliRunner().invoke(app, ["calibrate", str(demo / "log.csv"), "--weather", str(demo / "weather.csv"),
                                   "--model", "2R2C", "--window-areas", "S=8,E=3,W=3,N=4", "--out", str(out)])
    assert run.exit_code == 0, run.output
    body = json.loads(out.read_text())
    assert body["solar_weights"] == pytest.approx(chain.parse_window_areas("S=8,E=3,W=3,N=4"))
    assert any("weighted by the window areas given" in note for note in body["data"]["notes"])
    bad = CliRunner().invoke(app, ["calibrate", str(demo / "log.csv"), "--window-areas", "S=8,E", "--out",
                                   str(tmp_path / "bad.json")])
    assert bad.exit_code == 2 and not (tmp_path / "bad.json").exists()
    assert "--window-areas part 'E'" in bad.output


def test_the_plain_sum_says_how_to_weight_the_facades():
    demo = Path(__file__).parents[1] / "weather_demo"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        prepared = chain.prepare_log(demo / "log.csv", tz="America/Chicago", weather_path=demo / "weather.csv")
    assert any("all weighted alike" in n and "--window-areas" in n for n in prepared.notes)
