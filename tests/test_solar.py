"""Solar position, decomposition and façade irradiance against pvlib and published values."""

import pathlib

import numpy as np
import pandas as pd
import pvlib
import pytest

from thermorc import solar
from thermorc.errors import DataQualityWarning, InputError
from thermorc.read import read_weather

TMY3 = pathlib.Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"  # real open data shipped by pvlib
LAT, LON, ALT = 36.1, -79.95, 273.0  # Greensboro, from the TMY3 header


def test_nrel_spa_test_point():
    # Reda & Andreas (2004), NREL/TP-560-34302, worked example: 2003-10-17 12:30:30 UTC-7,
    # topocentric zenith 50.11162 deg, azimuth 194.34024 deg (from memory; pvlib reproduces
    # 50.111622 / 194.340241, check-values.md section 10 item 1).
    t = pd.DatetimeIndex(["2003-10-17 12:30:30"]).tz_localize("Etc/GMT+7")
    pos = pvlib.solarposition.get_solarposition(t, 39.742476, -105.1786, altitude=1830.14, pressure=82000,
                                                temperature=11, delta_t=67)
    assert pos["apparent_zenith"].iloc[0] == pytest.approx(50.11162, abs=1e-4)
    assert pos["azimuth"].iloc[0] == pytest.approx(194.34024, abs=1e-4)


@pytest.mark.parametrize("day, zenith, azimuth", [
    # check-values.md section 10 item 2 (COMPUTED with pvlib 0.16.1, nrel_numpy, 12:00 LST).
    ("1990-06-21", 13.483, 158.344), ("1990-12-21", 59.666, 175.241), ("1990-03-21", 36.310, 168.561)])
def test_solar_position_is_taken_at_the_interval_midpoint(day, zenith, azimuth):
    # A 1-minute interval starting 11:59:30 has its midpoint at 12:00:00.
    idx = pd.date_range(f"{day} 11:59:30", periods=2, freq="1min", tz="Etc/GMT+5")
    pos = solar.solar_position(idx, LAT, LON, ALT)
    assert pos["apparent_zenith"].iloc[0] == pytest.approx(zenith, abs=2e-3)
    assert pos["azimuth"].iloc[0] == pytest.approx(azimuth, abs=2e-3)


def test_south_facade_one_tmy3_hour_matches_pvlib_and_the_hand_check():
    w, _ = read_weather(TMY3)
    hour = w.loc["1990-01-15 12:00":"1990-01-15 13:00"]
    poa = solar.facade_irradiance(hour, LAT, LON, ALT, albedo=0.2)
    # check-values.md section 10 item 4: isotropic south-vertical 873.59 W m-2; hand check
    # sky = DHI/2 = 39.5, ground = GHI x 0.2 / 2 = 57.8, beam = DNI sin(57.155) cos(0.204).
    assert poa["poa_s_w_m2"].iloc[0] == pytest.approx(873.59, abs=0.01)
    ref = pvlib.irradiance.get_total_irradiance(90, 180, 57.155, 180.204, 924, 578, 79, albedo=0.2)
    assert poa["poa_s_w_m2"].iloc[0] == pytest.approx(ref["poa_global"], abs=0.05)
    assert poa["poa_h_w_m2"].iloc[0] == 578
    # North wall sees no beam at noon in January: diffuse only, 39.5 + 57.8.
    assert poa["poa_n_w_m2"].iloc[0] == pytest.approx(97.3, abs=0.01)


def test_annual_facade_totals():
    w, _ = read_weather(TMY3)
    poa = solar.facade_irradiance(w, LAT, LON, ALT).sum() / 1000.0
    # check-values.md section 10 item 5 (COMPUTED, mid-interval sun, albedo 0.2) and section 7
    # (annual GHI 1566.2 kWh m-2).
    assert poa["poa_s_w_m2"] == pytest.approx(1085.2, abs=0.5)
    assert poa["poa_e_w_m2"] == pytest.approx(879.6, abs=0.5)
    assert poa["poa_w_w_m2"] == pytest.approx(890.2, abs=0.5)
    assert poa["poa_n_w_m2"] == pytest.approx(517.7, abs=0.5)
    assert poa["poa_h_w_m2"] == pytest.approx(1566.2, abs=0.5)


@pytest.mark.parametrize("model", ["erbs", "disc"])
def test_decomposition_matches_pvlib_and_closes_the_balance(model):
    idx = pd.date_range("1990-06-21 08:00", periods=6, freq="h", tz="Etc/GMT+5")
    pos = solar.solar_position(idx, LAT, LON, ALT)
    ghi = np.array([300.0, 500.0, 700.0, 800.0, 800.0, 700.0])
    parts = solar.decompose(ghi, pos["zenith"], idx, model)
    doy = solar.midpoints(idx).day_of_year
    ref = pvlib.irradiance.erbs(ghi, pos["zenith"].to_numpy(), doy) if model == "erbs" else \
        pvlib.irradiance.disc(ghi, pos["zenith"].to_numpy(), doy)
    np.testing.assert_allclose(parts["dni"], ref["dni"], rtol=1e-9)
    # GHI = DNI cos(z) + DHI (definition of the components).
    np.testing.assert_allclose(parts["dni"] * np.cos(np.radians(pos["zenith"])) + parts["dhi"], ghi, rtol=1e-6)


def test_clear_sky_ghi_matches_pvlib_location():
    # check-values.md section 10 item 3: Ineichen clear sky at 12:00 LST, 21 June: GHI 939.7.
    idx = pd.date_range("1990-06-21 11:59:30", periods=2, freq="1min", tz="Etc/GMT+5")
    ghi = solar.clear_sky_ghi(idx, LAT, LON, ALT)
    assert ghi.iloc[0] == pytest.approx(939.7, abs=0.2)


def test_clear_sky_fallback_warns():
    idx = pd.date_range("1990-06-21", periods=24, freq="h", tz="Etc/GMT+5")
    log = pd.DataFrame({"indoor_c": 20.0, "heating_w": 0.0}, index=idx)
    with pytest.warns(DataQualityWarning, match="clear-sky"):
        poa = solar.solar_inputs(log, LAT, LON, ALT)
    assert poa["poa_h_w_m2"].max() > 800 and poa["poa_h_w_m2"].iloc[0] == 0


def test_bad_site_and_model_are_refused():
    idx = pd.date_range("1990-06-21", periods=3, freq="h", tz="UTC")
    w = pd.DataFrame({"ghi_w_m2": [0.0, 1.0, 2.0]}, index=idx)
    with pytest.raises(InputError, match="latitude"):
        solar.facade_irradiance(w, 95.0, 0.0)
    with pytest.raises(InputError, match="unknown transposition"):
        solar.facade_irradiance(w, 0.0, 0.0, model="magic")


def test_cached_sun_positions_equal_pvlib_called_directly():
    # Reference: pvlib.solarposition.get_solarposition (NREL SPA, Reda and Andreas 2004) at the
    # interval midpoints, called here without thermorc. A second call on the same site and grid
    # is served from the per-process cache and must give the same numbers, bit for bit, even
    # after a caller has changed the frame it got back.
    idx = pd.date_range("1990-01-08", periods=2880, freq="15min", tz="America/New_York")
    ref = pvlib.solarposition.get_solarposition(idx + pd.Timedelta(minutes=7.5), LAT, LON, altitude=ALT)
    first = solar.solar_position(idx, LAT, LON, ALT)
    first.iloc[:, :] = -1.0
    again = solar.solar_position(idx, LAT, LON, ALT)
    for pos in (again, solar.solar_position(idx.copy(), LAT, LON, ALT)):
        assert list(pos.columns) == list(ref.columns) and pos.index.equals(idx)
        np.testing.assert_array_equal(pos.to_numpy(), ref.to_numpy())
    # Another site, altitude or grid is another key, never a stale hit.
    for lat, lon, alt, grid in [(LAT + 1e-9, LON, ALT, idx), (LAT, LON, ALT + 1.0, idx), (LAT, LON, ALT, idx[1:]),
                                (LAT, LON, ALT, idx.tz_convert("UTC")[:100].union(idx.tz_convert("UTC")[101:200]))]:
        want = pvlib.solarposition.get_solarposition(solar.midpoints(grid), lat, lon, altitude=alt)
        np.testing.assert_array_equal(solar.solar_position(grid, lat, lon, alt).to_numpy(), want.to_numpy())


def test_facade_arrays_equal_the_table_and_clear_sky_equals_pvlib_location():
    w, _ = read_weather(TMY3)
    week = w.loc["1990-03-01":"1990-03-07"]
    table = solar.facade_irradiance(week.drop(columns=["dni_w_m2", "dhi_w_m2"]), LAT, LON, ALT)
    arrays = solar.facade_arrays(week["ghi_w_m2"].to_numpy(), week.index, LAT, LON, ALT)
    for name in table.columns:
        np.testing.assert_array_equal(arrays[name], table[name].to_numpy())
    # Reference: pvlib.location.Location.get_clearsky computing its own sun position.
    ref = pvlib.location.Location(LAT, LON, tz="UTC", altitude=ALT).get_clearsky(solar.midpoints(week.index))
    np.testing.assert_array_equal(solar.clear_sky_ghi(week.index, LAT, LON, ALT).to_numpy(), ref["ghi"].to_numpy())
