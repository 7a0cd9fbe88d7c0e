"""Uniform grid, gap mask, segments, spikes and stuck sensors; weather alignment."""

import warnings

import numpy as np
import pandas as pd
import pytest

from thermorc.align import align, align_weather, instants, interval_means
from thermorc.errors import DataQualityWarning, InputError


def frame(n=48, freq="15min", start="2024-01-10", tz="America/New_York", seed=0):
    idx = pd.date_range(start, periods=n, freq=freq, tz=tz, name="time")
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "indoor_c": 20 + 0.1 * np.sin(np.arange(n) / 5) + rng.normal(0, 0.01, n),
        "heating_w": np.where(np.arange(n) % 4 == 0, 2000.0, 0.0),
        "outdoor_c": np.linspace(0.0, 4.0, n),
    }, index=idx)


def test_interval_means_equal_pandas_resample_on_a_divisible_step():
    # Reference: pandas resample().mean() of interval-start data (closed='left', label='left').
    f = frame(96, "5min")
    al = align(f, 900)
    ref = f["heating_w"].resample("15min").mean()
    np.testing.assert_allclose(al.data["heating_w"].to_numpy(), ref.to_numpy())
    assert al.data.index.freq == pd.Timedelta(seconds=900)
    assert not al.gap_mask.any() and len(al.segments) == 1


def test_interval_means_are_exact_for_an_irregular_step_function():
    # Analytic: 1 W for 10 s then 3 W for 20 s -> mean over [0, 30) = (10 + 60) / 30.
    means, cov = interval_means(np.array([0.0, 10.0]), np.array([1.0, 3.0]), np.array([10.0, 20.0]),
                                np.array([0.0, 30.0]))
    assert means[0] == pytest.approx(70.0 / 30.0) and cov[0] == pytest.approx(1.0)


def test_instants_interpolate_linearly_but_never_across_a_long_hole():
    t = np.array([0.0, 100.0, 1000.0])
    v = np.array([0.0, 10.0, 20.0])
    out = instants(t, v, np.array([50.0, 100.0, 500.0]), max_gap_s=200.0)
    assert out[0] == pytest.approx(5.0) and out[1] == 10.0 and np.isnan(out[2])


def test_long_gap_splits_segments_and_is_not_bridged():
    f = frame(96, "15min")
    f = f.drop(f.index[40:52])  # a 3 h hole
    al = align(f, 900)
    assert len(al.data) == 96
    assert al.gap_mask.sum() >= 11
    assert al.data["indoor_c"].iloc[45:50].isna().all()
    assert len(al.segments) == 2
    assert al.segments[0][0] == al.data.index[0] and al.segments[1][1] == al.data.index[-1]
    assert al.max_gap_s == pytest.approx(2700.0)  # 3 x median input spacing


def test_spring_forward_grid_is_uniform_in_real_time():
    f = frame(24, "1h", start="2024-03-10", tz="America/New_York")
    al = align(f, 3600)
    assert not al.gap_mask.any()
    assert set(np.diff(al.data.index.asi8) / 1e9) == {3600.0}


def test_spike_is_removed_and_warned():
    f = frame(48)
    f.iloc[20, 0] = 35.0
    with pytest.warns(DataQualityWarning, match="spike"):
        al = align(f, 900)
    assert al.spikes == {"indoor_c": 1}
    assert al.data["indoor_c"].iloc[20] < 21  # interpolated between the neighbours


def test_stuck_sensor_is_flagged_when_heating_changes():
    f = frame(96, "15min")
    f.iloc[10:60, 0] = 20.5  # 12.5 h identical while the heating cycles
    with pytest.warns(DataQualityWarning, match="stuck"):
        al = align(f, 900)
    assert al.stuck and al.stuck[0]["column"] == "indoor_c" and al.stuck[0]["hours"] >= 12


def test_a_coarse_reading_may_hold_one_value_longer_before_it_counts_as_stuck():
    # A thermostat that reports whole degrees Fahrenheit (steps of 5/9 K) holds one reading
    # for hours while the heating cycles; the 6 h limit grows with the step (to 16.7 h here).
    f = frame(192, "15min")
    whole_f = np.round(f["indoor_c"] * 9 / 5 + 32 + 3 * np.sin(np.arange(192) / 7))
    f["indoor_c"] = (whole_f - 32) * 5 / 9
    f.iloc[10:50, 0] = f.iloc[10, 0]  # 10 h at one reading
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataQualityWarning)
        al = align(f, 900)
    assert not al.stuck
    f.iloc[10:100, 0] = f.iloc[10, 0]  # 22.5 h
    with pytest.warns(DataQualityWarning, match="stuck"):
        al = align(f, 900)
    assert al.stuck[0]["hours"] >= 22


def test_align_refuses_bad_frames():
    f = frame(10)
    with pytest.raises(InputError, match="no time zone"):
        align(f.tz_localize(None), 900)
    with pytest.raises(InputError, match="not positive"):
        align(f, 0)
    g = pd.concat([f, f.iloc[[3]].assign(indoor_c=25.0)])
    with pytest.raises(InputError, match="appears twice"):
        align(g, 900)
    shuffled = f.iloc[::-1]
    assert align(shuffled, 900).data.index.is_monotonic_increasing


def test_align_weather_to_another_zone_and_step():
    idx = pd.date_range("1990-01-01", periods=48, freq="h", tz="Etc/GMT+5")
    w = pd.DataFrame({"outdoor_c": np.arange(48.0), "ghi_w_m2": np.where(np.arange(48) % 2, 100.0, 0.0)}, index=idx)
    target = pd.date_range("1990-01-01 02:00", periods=20, freq="30min", tz="America/New_York")
    out = align_weather(w, target)
    # Instants: linear in time (07:00 UTC = 02:00 EST, reading 2 at 02:00 EST).
    assert out["outdoor_c"].iloc[0] == pytest.approx(2.0) and out["outdoor_c"].iloc[1] == pytest.approx(2.5)
    # Interval means: each 30 min lies inside one hourly interval.
    assert out["ghi_w_m2"].iloc[0] == 0.0 and out["ghi_w_m2"].iloc[2] == 100.0
    with pytest.raises(InputError, match="coerce_year"):
        align_weather(w, pd.date_range("2024-01-01", periods=4, freq="h", tz="UTC"))


def test_short_hole_is_filled_but_marked_in_the_gap_mask():
    f = frame(48, "15min")
    f = f.drop(f.index[[20]])  # one reading missing: bridged (under 3 x spacing) but not observed
    al = align(f, 900)
    assert not np.isnan(al.data["indoor_c"].iloc[20])
    assert al.gap_mask.iloc[20] and not al.gap_mask.iloc[18]
    assert al.data.notna().all().all()
    assert len(al.segments) == 2


def test_grid_across_a_clock_change_is_the_pandas_range():
    # Reference: pandas.date_range with a fixed 15-minute Timedelta step is absolute time, so
    # the grid over the spring-forward night of 10 March 2024 in Chicago has no hole and
    # 92 rows that day (23 h x 4; the clock change itself: US Energy Policy Act of 2005, sec. 110).
    f = frame(4 * 24 * 3, start="2024-03-09", tz="America/Chicago")
    al = align(f, 900)
    ref = pd.date_range("2024-03-09", periods=len(f), freq=pd.Timedelta(minutes=15), tz="America/Chicago")
    assert al.data.index.equals(ref) and al.data.index.freq == ref.freq
    assert (al.data.index.normalize() == pd.Timestamp("2024-03-10", tz="America/Chicago")).sum() == 92
    # Read as instants, the readings come back unchanged on a grid that coincides with them.
    np.testing.assert_array_equal(al.data["indoor_c"].to_numpy(), f["indoor_c"].to_numpy())
    assert not al.gap_mask.any() and list(al.observed.columns) == list(f.columns)
