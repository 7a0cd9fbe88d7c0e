"""Benchmark: modal lfilter simulation against scipy.signal.lsim, side by side (run on demand)."""

import time

import numpy as np
import pandas as pd
import pytest
import scipy.signal

from thermorc.network import Network
from thermorc.simulate import hold_setpoint, simulate

pytestmark = pytest.mark.benchmark


def _best_of(func, repeats):
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        out = func()
        best = min(best, time.perf_counter() - start)
    return best, out


def _year_inputs(net, rng, dt_s=300.0):
    n = int(365 * 86400 / dt_s)  # 105,120 steps at 5 minutes
    t_h = np.arange(n) * dt_s / 3600
    index = pd.date_range("2025-01-01", periods=n, freq=pd.Timedelta(seconds=dt_s), tz="UTC")
    return pd.DataFrame(
        {
            "outdoor_c": 5 + 8 * np.sin(2 * np.pi * (t_h - 15) / 24) + 10 * np.sin(2 * np.pi * t_h / 8760),
            "heating_w": rng.uniform(0, 6000, n),
            "solar_w_m2": np.clip(700 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None),
            "internal_w": 300 + 200 * rng.random(n),
        },
        index=index,
    )


def test_year_of_5_minute_steps_against_lsim():
    rng = np.random.default_rng(1)
    net = Network.from_preset(
        "3R2C",
        r_indoor_envelope_k_per_w=0.0012, r_envelope_outdoor_k_per_w=0.005, r_indoor_outdoor_k_per_w=0.025,
        c_indoor_j_per_k=4e6, c_envelope_j_per_k=4e7, solar_aperture_m2=5.0, solar_to_envelope_share=0.3,
    )
    inputs = _year_inputs(net, rng)
    space = net.state_space()
    x0 = np.array([20.0, 15.0])
    ours_s, ours = _best_of(lambda: simulate(net, inputs, x0=x0, boundary_hold="zoh", interval_means=False), 20)
    t = np.arange(len(inputs)) * 300.0
    sysc = scipy.signal.StateSpace(space.a, space.b, np.eye(2), np.zeros((2, 4)))
    u = inputs[list(net.inputs)].to_numpy()
    lsim_s, (_, _, xref) = _best_of(lambda: scipy.signal.lsim(sysc, u, t, X0=x0, interp=False), 2)
    err = np.abs(ours.temperatures_c[["indoor", "envelope"]].to_numpy() - xref).max()
    ratio = lsim_s / ours_s
    print(f"\n3R2C, {len(inputs)} steps, 4 inputs: thermorc {ours_s * 1e3:.1f} ms, lsim {lsim_s * 1e3:.0f} ms, "
          f"ratio {ratio:.0f}x, max difference {err:.2e} K")
    assert err < 1e-9
    assert ratio >= 100


def test_year_with_capacity_limited_heater():
    rng = np.random.default_rng(2)
    net = Network.from_preset(
        "2R2C", r_indoor_envelope_k_per_w=0.0012, r_envelope_outdoor_k_per_w=0.005,
        c_indoor_j_per_k=4e6, c_envelope_j_per_k=4e7, solar_aperture_m2=5.0,
    )
    inputs = _year_inputs(net, rng).drop(columns="heating_w")
    hours = inputs.index.hour
    setpoint = np.where((hours >= 23) | (hours < 6), 16.0, 21.0)
    hold_setpoint(net, inputs.iloc[:100], setpoint[:100], capacity_w=5000.0)  # compile once
    secs, res = _best_of(lambda: hold_setpoint(net, inputs, setpoint, capacity_w=5000.0), 3)
    print(f"\nideal heater, capacity-limited, {len(inputs)} steps: {secs * 1e3:.0f} ms; "
          f"shortfall in {int((res.shortfall_w > 0).sum())} intervals")
    assert secs < 0.5
