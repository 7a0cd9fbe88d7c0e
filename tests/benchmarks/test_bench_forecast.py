"""Benchmark: a year of 5-minute forecast steps and a 20-strategy setback comparison (run on demand)."""

import pathlib
import time

import numpy as np
import pvlib
import pytest

from thermorc.forecast import forecast
from thermorc.read import read_weather
from thermorc.result import CalibrationResult
from thermorc.schedule import parse_schedule
from thermorc.setback import compare, parse_strategies

pytestmark = pytest.mark.benchmark

TMY3 = pathlib.Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"


def _best_of(func, repeats):
    best = np.inf
    out = None
    for _ in range(repeats):
        start = time.perf_counter()
        out = func()
        best = min(best, time.perf_counter() - start)
    return best, out


def _home():
    return CalibrationResult(model="3R2C", parameters=dict(
        r_indoor_envelope_k_per_w=0.0005, r_envelope_outdoor_k_per_w=0.0045, r_indoor_outdoor_k_per_w=0.03,
        c_indoor_j_per_k=3e6, c_envelope_j_per_k=2.4e7, solar_aperture_m2=3.0, solar_to_envelope_share=0.3,
        internal_gains_w=400.0))


def test_year_of_5_minute_steps_with_a_capacity_limited_heater():
    weather, meta = read_weather(TMY3)
    sched = parse_schedule({"week": {"weekdays": [["06:30", 20.5], ["08:30", 16.0], ["17:00", 20.5], ["22:30", 16.0]],
                                     "weekend": [["08:00", 20.5], ["23:00", 16.0]]}})
    run = lambda: forecast(_home(), weather, sched, capacity_w=9000.0, metadata=meta)  # noqa: E731
    run()  # compile and warm caches
    seconds, found = _best_of(run, 5)
    rows = len(found.frame)
    t_stat, stat = _best_of(lambda: forecast(_home(), weather, sched, heater="thermostat", capacity_w=9000.0,
                                             metadata=meta), 3)
    print(f"\nforecast, 3R2C, {rows} steps of 300 s, capacity-limited heater: {seconds * 1e3:.0f} ms "
          f"(thermostat: {t_stat * 1e3:.0f} ms, {stat.summary['cycles']} cycles); "
          f"{found.summary['heating_kwh']:.0f} kWh")
    assert rows == 105120
    assert seconds < 0.5


def test_twenty_strategy_comparison():
    weather, _ = read_weather(TMY3)
    entries = []
    for depth in (2.0, 3.0, 4.0, 5.0, 6.0):
        night = {"everyday": [["06:00", 20.5], ["22:00", 20.5 - depth]]}
        entries += [
            {"name": f"night -{depth:g} K", "week": night},
            {"name": f"night -{depth:g} K, preheat 1 h", "week": night, "preheat_h": 1.0},
            {"name": f"night -{depth:g} K, optimal start", "week": night, "optimal_start": True},
            {"name": f"day and night -{depth:g} K", "week": {
                "weekdays": [["06:00", 20.5], ["08:00", 20.5 - depth], ["16:00", 20.5], ["22:00", 20.5 - depth]],
                "weekend": [["07:00", 20.5], ["23:00", 20.5 - depth]]}},
        ]
    assert len(entries) == 20
    plan = parse_strategies({"baseline": {"name": "steady", "constant_c": 20.5}, "strategy": entries,
                             "capacity_w": 10000.0})
    compare(_home(), weather, parse_strategies({"baseline": {"constant_c": 20.5}, "strategy": entries[2:3],
                                                "capacity_w": 10000.0}))  # compile
    seconds, found = _best_of(lambda: compare(_home(), weather, plan), 3)
    best = found.table["savings_pct"].idxmax()
    print(f"\nsetback comparison, baseline + 20 strategies, a year at 300 s: {seconds:.2f} s "
          f"(largest saving {found.table.loc[best, 'savings_pct']:.1f} % for '{best}')")
    assert seconds < 5.0
