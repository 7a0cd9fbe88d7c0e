"""
Property-based checks (hypothesis) of the readers, unit conversions, network reduction,
simulation and calibration, each against a law or an outside definition named beside it.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.test_network import random_networks
from thermorc import units
from thermorc.network import Network
from thermorc.read import read_log
from thermorc.simulate import simulate
from thermorc.write import write_csv

# Derandomized: the default run is the same on every machine; CI never flakes.
QUICK = settings(max_examples=25, deadline=None, derandomize=True,
                 suppress_health_check=[HealthCheck.function_scoped_fixture])

# ------------------------------------------------------------------------------------------
# Readers: a canonical CSV written from a frame reads back to the same frame
# ------------------------------------------------------------------------------------------

ZONES = ["UTC", "America/New_York", "Europe/Berlin", "Asia/Kolkata", "Pacific/Chatham"]


@st.composite
def canonical_frames(draw):
    n = draw(st.integers(3, 60))
    step_s = draw(st.sampled_from([60, 300, 900, 3600]))
    start = draw(st.datetimes(min_value=pd.Timestamp("2000-01-01").to_pydatetime(),
                              max_value=pd.Timestamp("2090-01-01").to_pydatetime()))
    tz = draw(st.sampled_from(ZONES))
    # Stamps in UTC then shown in the zone: every stamp exists and is unique (no DST trap).
    index = pd.date_range(pd.Timestamp(start).floor("min"), periods=n, freq=pd.Timedelta(seconds=step_s),
                          tz="UTC").tz_convert(tz)
    indoor = draw(st.lists(st.floats(-20.0, 45.0), min_size=n, max_size=n))
    heating = draw(st.lists(st.floats(0.0, 50_000.0), min_size=n, max_size=n))
    outdoor = draw(st.lists(st.floats(-40.0, 45.0), min_size=n, max_size=n))
    frame = pd.DataFrame({"indoor_c": indoor, "heating_w": heating, "outdoor_c": outdoor}, index=index)
    frame.index.name = "time"
    return frame, tz


@QUICK
@given(canonical_frames())
def test_canonical_csv_round_trip(tmp_path_factory, case):
    frame, tz = case
    path = tmp_path_factory.mktemp("rt") / "log.csv"
    # 17 significant digits write any double exactly (IEEE 754-2008, clause 5.12.2).
    write_csv(path, frame, float_format="%.17g")
    data, meta = read_log(path, tz=tz)
    np.testing.assert_array_equal(data.index.as_unit("ns").asi8, frame.index.as_unit("ns").asi8)
    for col in frame.columns:
        np.testing.assert_array_equal(data[col].to_numpy(), frame[col].to_numpy())
    assert meta["rows"] == len(frame)


@QUICK
@given(st.lists(st.floats(-100.0, 100.0), min_size=1, max_size=50))
def test_temperature_conversions_invert(celsius):
    c = np.array(celsius)
    # degF = degC x 1.8 + 32 and K = degC + 273.15 (NIST SP 811, B.8 and 4.2.1.1).
    np.testing.assert_allclose(units.to_celsius(c * 1.8 + 32.0, "degF"), c, atol=1e-12)
    np.testing.assert_allclose(units.to_celsius(c + 273.15, "K"), c, atol=1e-12)
    np.testing.assert_array_equal(units.to_celsius(c, "degC"), c)


@QUICK
@given(st.floats(0.0, 1e6), st.sampled_from(["W", "kW", "MW", "Btu/h", "kBtu/h", "ton"]))
def test_power_factor_inverts(watts, unit):
    # NIST SP 811 B.9: 1 Btu_IT/h = 0.293 071 1 W; a ton of refrigeration is 12 000 Btu_IT/h.
    reference = {"W": 1.0, "kW": 1e3, "MW": 1e6, "Btu/h": 0.2930711, "kBtu/h": 293.0711, "ton": 3516.853}[unit]
    factor = units.power_factor_w(unit)
    assert factor == pytest.approx(reference, rel=1e-6)
    assert (watts / factor) * factor == pytest.approx(watts, rel=1e-12, abs=1e-9)


@QUICK
@given(st.floats(0.0, 1.0), st.sampled_from([60.0, 300.0, 900.0, 3600.0]))
def test_runtime_conversions_invert(fraction, interval_s):
    # Runtime as seconds, minutes or percent of the interval is the same fraction (definitions).
    cases = {"s": fraction * interval_s, "min": fraction * interval_s / 60.0, "percent": 100.0 * fraction,
             "fraction": fraction}
    for unit, value in cases.items():
        assert float(units.runtime_to_fraction(np.array([value]), unit, interval_s)[0]) == pytest.approx(
            fraction, abs=1e-12)


# ------------------------------------------------------------------------------------------
# Network: reduction of massless nodes
# ------------------------------------------------------------------------------------------

def _with_tiny_capacitances(net, eps_j_per_k):
    """The same network with every massless node given capacitance ``eps``."""
    k, e, caps = net.matrices()
    twin = Network(boundaries=net.boundaries, inputs=net.input_channels)
    for name, c in zip(net.nodes, caps):
        twin.add_node(name, c if c > 0 else eps_j_per_k)
    names = list(net.nodes) + list(net.boundaries)
    n = len(net.nodes)
    for i in range(n):
        for j in range(i + 1, n):
            if k[i, j] != 0:
                twin.add_conductance(names[i], names[j], -k[i, j])
        for b, name in enumerate(net.boundaries):
            if e[i, b] != 0:
                twin.add_conductance(names[i], name, e[i, b])
    for ch_i, ch in enumerate(net.input_channels):
        for i in range(n):
            g = e[i, len(net.boundaries) + ch_i]
            if g != 0:
                twin.add_heat_input(ch, names[i], g)
    return twin


@settings(max_examples=40, deadline=None, derandomize=True)
@given(random_networks())
def test_reduction_is_the_vanishing_capacitance_limit(net):
    # A massless node is the limit C -> 0 of a node with capacitance (singular perturbation,
    # Kokotovic, Khalil and O'Reilly 1986, ch. 1, from memory): the slow modes and the steady
    # state of the reduced network must be those of the full one with tiny capacitances.
    space = net.state_space()
    # eps = 1e-6 C_min balances two errors: the perturbation of the slow modes grows with eps,
    # the eigensolver's loss of digits with the stiffness G / eps (up to a slow mode of a year
    # against the fast ones of ~0.1 s here, some 1e9).
    twin = _with_tiny_capacitances(net, 1e-6 * space.capacitances_j_per_k.min())
    assert len(twin.nodes) == len(net.nodes)
    np.testing.assert_array_equal(twin.matrices()[0], net.matrices()[0])  # same conductances
    slow = twin.time_constants_s()[: space.a.shape[0]]
    np.testing.assert_allclose(slow, net.time_constants_s(), rtol=1e-3)
    assert twin.time_constants_s()[space.a.shape[0]:].max(initial=0.0) < 1e-2 * slow.min()
    for node in net.nodes:
        np.testing.assert_allclose(twin.heat_loss_coefficient_w_per_k(node)["total"],
                                   net.heat_loss_coefficient_w_per_k(node)["total"], rtol=1e-9)


@settings(max_examples=40, deadline=None, derandomize=True)
@given(random_networks(), st.floats(-30.0, 30.0), st.floats(-30.0, 30.0), st.floats(0.0, 1e4))
def test_steady_state_is_a_weighted_mean_of_boundaries_plus_heat(net, t_out, t_ground, q_w):
    # Maximum principle of a resistive network (the inverse of an irreducible M-matrix is
    # positive; Varga, Matrix Iterative Analysis, ch. 3, from memory): with no heat input every
    # node lies between the boundary temperatures; heat input only raises temperatures.
    space = net.state_space()
    u0 = np.array([t_out, t_ground, 0.0])
    x = np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ u0)
    y = space.c @ x + space.d @ u0
    lo, hi = min(t_out, t_ground), max(t_out, t_ground)
    assert np.all(y >= lo - 1e-9 * (1 + abs(lo))) and np.all(y <= hi + 1e-9 * (1 + abs(hi)))
    u1 = np.array([t_out, t_ground, q_w])
    x1 = np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ u1)
    assert np.all(space.c @ x1 + space.d @ u1 >= y - 1e-9)


# ------------------------------------------------------------------------------------------
# Simulation of random networks (massless nodes, two boundaries)
# ------------------------------------------------------------------------------------------

def _inputs(net, seed, n=200, dt_s=600.0):
    rng = np.random.default_rng(seed)
    index = pd.date_range("2025-01-01", periods=n, freq=pd.Timedelta(seconds=dt_s), tz="UTC")
    data = {b: rng.normal(0, 5, n).cumsum() * 0.1 + rng.uniform(-10, 10) for b in net.boundaries}
    data.update({ch: np.repeat(rng.uniform(0, 5000, n // 4 + 1), 4)[:n] for ch in net.input_channels})
    return pd.DataFrame(data, index=index)


@settings(max_examples=25, deadline=None, derandomize=True)
@given(random_networks(), st.integers(0, 2**31 - 1))
def test_energy_balance_of_random_networks(net, seed):
    # First law: heat in = heat to the boundaries + change of stored heat, from the exact
    # interval-mean temperatures (zero-order hold of every input).
    inputs = _inputs(net, seed)
    res = simulate(net, inputs, boundary_hold="zoh")
    k, e, caps = net.matrices()
    dt = 600.0
    means = res.mean_temperatures_c[list(net.nodes)].to_numpy()[:-1]
    u = inputs[list(net.inputs)].to_numpy()[:-1]
    nb = len(net.boundaries)
    heat_in = (u[:, nb:] @ e[:, nb:].T).sum() * dt
    to_boundaries = sum(((means - u[:, [j]]) @ e[:, j]).sum() * dt for j in range(nb))
    temps = res.temperatures_c[list(net.nodes)].to_numpy()
    stored = caps @ (temps[-1] - temps[0])
    scale = abs(heat_in) + abs(to_boundaries) + abs(stored) + 1.0
    assert abs(heat_in - to_boundaries - stored) <= 1e-8 * scale


@settings(max_examples=20, deadline=None, derandomize=True)
@given(random_networks(), st.integers(0, 2**31 - 1), st.floats(-3.0, 3.0), st.integers(1, 30))
def test_superposition_and_time_invariance_of_random_networks(net, seed, scale, shift):
    # Definition of a linear time-invariant system: the response to a*u1 + u2 from rest is
    # a*y1 + y2; a delayed input gives the delayed response.
    u1, u2 = _inputs(net, seed), _inputs(net, seed + 1)
    u1.iloc[0] = 0.0  # with a first-order hold a delay is exact only for a signal starting at 0
    zero = np.zeros(net.state_space().a.shape[0])
    y1 = simulate(net, u1, x0=zero).temperatures_c.to_numpy()
    y2 = simulate(net, u2, x0=zero).temperatures_c.to_numpy()
    y12 = simulate(net, scale * u1 + u2, x0=zero).temperatures_c.to_numpy()
    np.testing.assert_allclose(y12, scale * y1 + y2, atol=1e-9 * (1 + np.abs(y12).max()))
    delayed = u1.copy()
    delayed.iloc[:] = 0.0
    delayed.iloc[shift:] = u1.iloc[:-shift].to_numpy()
    yd = simulate(net, delayed, x0=zero).temperatures_c.to_numpy()
    np.testing.assert_allclose(yd[shift:], y1[:-shift], atol=1e-9 * (1 + np.abs(y1).max()))


# ------------------------------------------------------------------------------------------
# Calibration recovers the parameters of data simulated from the same model
# ------------------------------------------------------------------------------------------

def simulated_log(seed, days=14, step_s=1800.0, noise_k=0.02):
    """A log simulated from a random 2R2C (ordinary homes, common practice) plus white noise."""
    rng = np.random.default_rng(seed)
    ua = rng.uniform(100, 300)
    share, c_total = rng.uniform(0.1, 0.3), rng.uniform(1e7, 4e7)
    r_in = 1 / (ua * rng.uniform(4, 10))
    p = dict(r_indoor_envelope_k_per_w=r_in, r_envelope_outdoor_k_per_w=1 / ua - r_in,
             c_indoor_j_per_k=c_total * share, c_envelope_j_per_k=c_total * (1 - share),
             solar_aperture_m2=rng.uniform(1, 5))
    net = Network.from_preset("2R2C", p)
    n = int(days * 86400 / step_s)
    index = pd.date_range("2025-01-01", periods=n, freq=pd.Timedelta(seconds=step_s), tz="UTC")
    h = np.arange(n) * step_s / 3600
    outdoor = 2 + 5 * np.sin(2 * np.pi * (h - 15) / 24) + np.cumsum(rng.normal(0, 0.1, n))
    ghi = np.clip(500 * np.sin(2 * np.pi * (h % 24 - 7) / 20), 0, None) * np.repeat(
        rng.uniform(0.2, 1, days + 1), int(86400 / step_s))[:n]
    per_hour = max(1, int(3600 / step_s))
    heat = np.repeat(rng.choice([0.0, 2000.0, 5000.0], n // per_hour + 1), per_hour)[:n]
    inputs = pd.DataFrame({"outdoor_c": outdoor, "heating_w": heat, "solar_w_m2": ghi,
                           "internal_w": np.full(n, 300.0)}, index=index)[list(net.inputs)]
    indoor = simulate(net, inputs, boundary_hold="foh").temperatures_c["indoor"].to_numpy()
    log = pd.DataFrame({"indoor_c": indoor + rng.normal(0, noise_k, n), "heating_w": heat, "outdoor_c": outdoor,
                        "ghi_w_m2": ghi}, index=index)
    return log, net


@settings(max_examples=6, deadline=None, derandomize=True)
@given(st.integers(0, 10_000))
def test_calibrate_recovers_ua_of_a_random_2r2c(seed):
    from thermorc import estimate

    log, net = simulated_log(seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = estimate.calibrate(estimate.calibration_data(log), model="2R2C")
    true_ua = net.heat_loss_coefficient_w_per_k("indoor")["total"]
    assert result.heat_loss_coefficient_w_per_k == pytest.approx(true_ua, rel=0.03)
    # The slow time constant (what a setback depends on) too, more loosely.
    assert result.time_constants_h[0] == pytest.approx(net.time_constants_s()[0] / 3600, rel=0.10)
