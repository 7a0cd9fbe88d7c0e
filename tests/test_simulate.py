"""Simulation: exact discretisation and modal recursion against outside references."""

import numpy as np
import pandas as pd
import pytest
import scipy.integrate
import scipy.signal
from hypothesis import given, settings, strategies as st

from conftest import random_inputs, random_preset
from thermorc.errors import InputError, NetworkError
from thermorc.network import Network
from thermorc.simulate import discretise, hold_setpoint, phi_functions, simulate


def one_r_one_c(r=0.005, c=1e7, aperture=0.0):
    return Network.from_preset("1R1C", r_indoor_outdoor_k_per_w=r, c_indoor_j_per_k=c, solar_aperture_m2=aperture)


def test_zoh_matches_cont2discrete_and_published_1r1c_numbers():
    # check-values.md section 9 (COMPUTED with scipy expm): R = 0.005 K/W, C = 1e7 J/K,
    # dt = 3600 s -> A_d = 0.9305308958, B_d = [0.0694691, 3.4735e-4] for [T_a, Phi].
    space = one_r_one_c().state_space()
    ad, b0, b1 = discretise(space.a, space.b, 3600.0, "zoh")
    assert ad[0, 0] == pytest.approx(0.9305308958, abs=1e-10)
    assert b0[0, 0] == pytest.approx(0.0694691, abs=1e-7)
    assert b0[0, 1] == pytest.approx(3.4735e-4, rel=1e-4)
    assert not b1.any()
    # scipy.signal.cont2discrete(method='zoh') is the library reference.
    ref = scipy.signal.cont2discrete((space.a, space.b, space.c, space.d), 3600.0, method="zoh")
    np.testing.assert_allclose(ad, ref[0], rtol=1e-13)
    np.testing.assert_allclose(b0, ref[1], rtol=1e-12, atol=1e-18)


def test_zoh_scalar_invariants():
    # STYLE.md / analytic: one ZOH step has a = exp(-dt/RC), gains R(1-a) for Q and 1-a for T_out.
    r, c, dt = 0.004, 2.5e7, 900.0
    space = one_r_one_c(r, c).state_space()
    ad, b0, _ = discretise(space.a, space.b, dt)
    a = np.exp(-dt / (r * c))
    assert ad[0, 0] == pytest.approx(a, rel=1e-14)
    assert b0[0, 0] == pytest.approx(1 - a, rel=1e-12)
    assert b0[0, 1] == pytest.approx(r * (1 - a), rel=1e-12)


def test_phi_functions_series_and_exact_branches_agree():
    # phi-functions of exponential integrators (Hochbruck & Ostermann 2010): closed forms,
    # continuous across the switch to the Taylor series.
    x = np.array([0.0, 1e-8, 9.99e-4, 1.001e-3, 0.5, 3.0, 50.0])
    p1, p2, p3 = phi_functions(x)
    xe = np.where(x == 0, np.nan, x)
    with np.errstate(invalid="ignore"):
        np.testing.assert_allclose(p1[3:], ((1 - np.exp(-xe)) / xe)[3:], rtol=1e-12)
        np.testing.assert_allclose(p2[3:], ((xe - 1 + np.exp(-xe)) / xe**2)[3:], rtol=1e-9)
    assert (p1[0], p2[0], p3[0]) == (1.0, 0.5, pytest.approx(1 / 6))
    np.testing.assert_allclose(phi_functions(9.99e-4)[2], phi_functions(1.001e-3)[2], rtol=1e-5)


def test_1r1c_step_response_matches_lumped_capacitance_solution():
    # T(t) = T_inf + (T0 - T_inf) exp(-t/RC), T_inf = T_out + Q R (lumped-capacitance
    # solution, Incropera et al., sec. 5.2; any heat-transfer textbook).
    r, c, q, t_out, t0 = 0.005, 1e7, 2000.0, -2.0, 15.0
    net = one_r_one_c(r, c)
    index = pd.date_range("2025-01-01", periods=500, freq="5min", tz="UTC")
    inputs = pd.DataFrame({"outdoor_c": t_out, "heating_w": q, "solar_w_m2": 0.0, "internal_w": 0.0}, index=index)
    res = simulate(net, inputs, x0=[t0])
    t = np.arange(500) * 300.0
    expected = t_out + q * r + (t0 - t_out - q * r) * np.exp(-t / (r * c))
    np.testing.assert_allclose(res.temperatures_c["indoor"], expected, rtol=1e-12, atol=1e-11)


@pytest.mark.parametrize("name", ["2R2C", "3R2C"])
@pytest.mark.parametrize("hold", ["zoh", "foh"])
def test_presets_match_scipy_lsim(name, hold, rng):
    # scipy.signal.lsim is the reference: interp=False is a ZOH, interp=True linear
    # interpolation (FOH) of all inputs. Heat inputs are built piecewise constant on a 6x
    # coarser grid and compared at the coarse stamps, so both holds see the same signals.
    net = random_preset(name, rng)
    space = net.state_space()
    inputs = random_inputs(net, 600, 600.0, rng)
    if hold == "foh":
        # lsim's linear interpolation applies to all inputs; make the heat inputs linear too
        # by holding boundaries only, i.e. compare with heat inputs set to zero.
        inputs[list(net.input_channels)] = 0.0
    res = simulate(net, inputs, boundary_hold=hold)
    t = np.arange(len(inputs)) * 600.0
    x0 = res.temperatures_c[list(space.states)].iloc[0].to_numpy()
    sysc = scipy.signal.StateSpace(space.a, space.b, np.eye(len(space.states)), np.zeros_like(space.b))
    _, _, xref = scipy.signal.lsim(sysc, inputs[list(net.inputs)].to_numpy(), t, X0=x0, interp=(hold == "foh"))
    np.testing.assert_allclose(res.temperatures_c[list(space.states)].to_numpy(), xref, rtol=0, atol=1e-9)


@pytest.mark.parametrize("name", ["1R1C", "2R2C", "3R2C"])
def test_presets_match_solve_ivp_on_irregular_steps(name, rng):
    # Independent reference: scipy.integrate.solve_ivp (DOP853, rtol 1e-12) on the same ODE with
    # boundary temperatures interpolated linearly and heat inputs held over each interval.
    net = random_preset(name, rng)
    space = net.state_space()
    steps = rng.choice([300.0, 600.0, 900.0, 3600.0], size=120)
    index = pd.DatetimeIndex(pd.Timestamp("2025-02-01", tz="UTC") + pd.to_timedelta(np.cumsum(np.r_[0, steps]), unit="s"))
    inputs = random_inputs(net, len(index), 600.0, rng).set_index(index)
    res = simulate(net, inputs)
    t = np.asarray((index - index[0]).total_seconds())
    u = inputs[list(net.inputs)].to_numpy()
    nb = space.n_boundaries

    def rhs(time, x):
        k = min(np.searchsorted(t, time, side="right") - 1, len(t) - 2)
        w = (time - t[k]) / (t[k + 1] - t[k])
        uu = u[k].copy()
        uu[:nb] = (1 - w) * u[k, :nb] + w * u[k + 1, :nb]
        return space.a @ x + space.b @ uu

    x = res.temperatures_c[list(space.states)].iloc[0].to_numpy()
    out = [x]
    for k in range(len(t) - 1):  # integrate interval by interval so no kink is stepped over
        sol = scipy.integrate.solve_ivp(rhs, (t[k], t[k + 1]), x, method="DOP853", rtol=1e-12, atol=1e-12)
        x = sol.y[:, -1]
        out.append(x)
    np.testing.assert_allclose(res.temperatures_c[list(space.states)].to_numpy(), np.array(out), atol=1e-7)


@pytest.mark.parametrize("name", ["1R1C", "2R2C", "3R2C"])
def test_energy_balance_closes(name, rng):
    # First law over a run: heat in = heat to boundaries + change in stored heat, using the
    # exact interval-mean temperatures (conservation of energy; no outside number needed).
    net = random_preset(name, rng)
    inputs = random_inputs(net, 2000, 300.0, rng)
    res = simulate(net, inputs, boundary_hold="zoh")
    k, e, caps = net.matrices()
    dt = 300.0
    means = res.mean_temperatures_c[net.nodes].to_numpy()[:-1]
    u = inputs[list(net.inputs)].to_numpy()[:-1]
    nb = len(net.boundaries)
    heat_in = (u[:, nb:] @ e[:, nb:].T).sum() * dt
    to_boundaries = 0.0
    for j in range(nb):
        g = e[:, j]
        to_boundaries += ((means - u[:, [j]]) @ g).sum() * dt
    temps = res.temperatures_c[net.nodes].to_numpy()
    stored = caps @ (temps[-1] - temps[0])
    assert heat_in == pytest.approx(to_boundaries + stored, rel=1e-9)


def test_massless_nodes_are_reported():
    net = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    net.add_node("indoor", 1e7).add_node("surface", 0.0)
    net.add_resistance("indoor", "surface", 0.002).add_resistance("surface", "outdoor_c", 0.003)
    net.add_heat_input("heating_w", "indoor")
    inputs = pd.DataFrame({"outdoor_c": np.full(50, 0.0), "heating_w": 1000.0})
    res = simulate(net, inputs, x0=[20.0], dt_s=600.0)
    expected = 0.6 * res.temperatures_c["indoor"]  # voltage divider, outdoor at 0 degC
    np.testing.assert_allclose(res.temperatures_c["surface"], expected, rtol=1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), scale=st.floats(-3.0, 3.0), shift=st.integers(1, 40))
def test_superposition_and_time_invariance(seed, scale, shift):
    # Linear time-invariant system: response to a*u1 + u2 from rest equals a*y1 + y2, and a
    # delayed input gives a delayed response (definition of an LTI system).
    rng = np.random.default_rng(seed)
    net = random_preset("3R2C", rng)
    u1 = random_inputs(net, 300, 600.0, rng)
    u1.iloc[0] = 0.0  # with a first-order hold, a delay is exact only for a signal starting at 0
    u2 = random_inputs(net, 300, 600.0, rng)
    zero = np.zeros(2)
    y1 = simulate(net, u1, x0=zero).temperatures_c.to_numpy()
    y2 = simulate(net, u2, x0=zero).temperatures_c.to_numpy()
    y12 = simulate(net, scale * u1 + u2, x0=zero).temperatures_c.to_numpy()
    np.testing.assert_allclose(y12, scale * y1 + y2, atol=1e-9 * (1 + np.abs(y12).max()))
    delayed = u1.copy()
    delayed.iloc[:] = 0.0
    delayed.iloc[shift:] = u1.iloc[:-shift].to_numpy()
    yd = simulate(net, delayed, x0=zero).temperatures_c.to_numpy()
    np.testing.assert_allclose(yd[shift:], y1[:-shift], atol=1e-9 * (1 + np.abs(y1).max()))


def test_simulate_refuses_bad_inputs():
    net = one_r_one_c()
    good = pd.DataFrame({"outdoor_c": [0.0, 1.0], "heating_w": 0.0, "solar_w_m2": 0.0, "internal_w": 0.0},
                        index=pd.date_range("2025-01-01", periods=2, freq="h", tz="UTC"))
    with pytest.raises(InputError, match="missing input column"):
        simulate(net, good.drop(columns="internal_w"))
    bad = good.copy()
    bad.iloc[1, 0] = np.nan
    with pytest.raises(InputError, match="non-finite"):
        simulate(net, bad)
    with pytest.raises(InputError, match="increase strictly"):
        simulate(net, good.set_axis(good.index[::-1]))


def test_ideal_heater_steady_state_is_ua_times_difference_minus_gains():
    # Steady state: heat = UA (T_set - T_out) - gains (energy balance of a heated zone).
    net = Network.from_preset(
        "3R2C", r_indoor_envelope_k_per_w=0.0015, r_envelope_outdoor_k_per_w=0.006, r_indoor_outdoor_k_per_w=0.03,
        c_indoor_j_per_k=3e6, c_envelope_j_per_k=3e7, solar_aperture_m2=4.0,
    )
    ua = net.heat_loss_coefficient_w_per_k()["total"]
    index = pd.date_range("2025-01-01", periods=400, freq="15min", tz="UTC")
    inputs = pd.DataFrame({"outdoor_c": -3.0, "solar_w_m2": 50.0, "internal_w": 300.0}, index=index)
    res = hold_setpoint(net, inputs, 20.0)
    expected = ua * (20.0 + 3.0) - 4.0 * 50.0 - 300.0
    np.testing.assert_allclose(res.inputs["heating_w"], expected, rtol=1e-9)
    np.testing.assert_allclose(res.temperatures_c["indoor"], 20.0, atol=1e-9)


def test_ideal_heater_recovery_with_capacity_limit_matches_closed_form():
    # 1R1C after a setback, heater at full capacity: T(t) = T_inf + (T0 - T_inf) exp(-t/RC) with
    # T_inf = T_out + Qmax R until the setpoint is reached (lumped-capacitance solution).
    r, c, t_out, q_max = 0.005, 1e7, 0.0, 6000.0
    net = one_r_one_c(r, c)
    n = 400
    index = pd.date_range("2025-01-01", periods=n, freq="5min", tz="UTC")
    inputs = pd.DataFrame({"outdoor_c": t_out, "solar_w_m2": 0.0, "internal_w": 0.0}, index=index)
    setpoint = np.full(n, 21.0)
    res = hold_setpoint(net, inputs, setpoint, capacity_w=q_max, x0=[15.0])
    t = np.arange(n) * 300.0
    t_inf = t_out + q_max * r
    free = t_inf + (15.0 - t_inf) * np.exp(-t / (r * c))
    reach = np.argmax(free >= 21.0)
    np.testing.assert_allclose(res.temperatures_c["indoor"].to_numpy()[:reach], free[:reach], rtol=1e-10)
    assert res.inputs["heating_w"].iloc[: reach - 1].eq(q_max).all()
    # The heater can hold 21 degC (UA x 21 K = 4200 W < 6000 W): a slow recovery is no shortfall.
    assert res.shortfall_w.eq(0).all()
    np.testing.assert_allclose(res.temperatures_c["indoor"].iloc[reach + 1:], 21.0, atol=1e-9)
    # Holding 21 degC afterwards needs UA * 21 K = 4200 W.
    np.testing.assert_allclose(res.inputs["heating_w"].iloc[reach + 1:-1], 21.0 / r, rtol=1e-9)


def test_shortfall_is_the_lack_of_holding_power():
    # A 1R1C held at 21 degC with 0 degC outside needs UA x 21 K = 4200 W (steady energy
    # balance); a 3000 W heater falls 1200 W short once the zone has cooled to where it can
    # stay, and the zone settles at T_out + Q_max R (lumped-capacitance solution).
    r = 0.005
    net = one_r_one_c(r, 1e7)
    index = pd.date_range("2025-01-01", periods=3000, freq="5min", tz="UTC")
    inputs = pd.DataFrame({"outdoor_c": 0.0, "solar_w_m2": 0.0, "internal_w": 0.0}, index=index)
    res = hold_setpoint(net, inputs, 21.0, capacity_w=3000.0, x0=[21.0])
    np.testing.assert_allclose(res.shortfall_w.iloc[:-1], 1200.0, rtol=1e-9)
    assert res.temperatures_c["indoor"].iloc[-1] == pytest.approx(3000.0 * r, abs=0.05)


def test_ideal_heater_floats_when_warm_and_refuses_massless_node():
    net = one_r_one_c()
    index = pd.date_range("2025-06-01", periods=100, freq="h", tz="UTC")
    inputs = pd.DataFrame({"outdoor_c": 25.0, "solar_w_m2": 0.0, "internal_w": 0.0}, index=index)
    res = hold_setpoint(net, inputs, 20.0)
    assert (res.inputs["heating_w"] == 0).all()
    np.testing.assert_allclose(res.temperatures_c["indoor"], 25.0)
    massless = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    massless.add_node("indoor", 0.0).add_node("mass", 1e7)
    massless.add_conductance("indoor", "mass", 100).add_conductance("indoor", "outdoor_c", 100)
    massless.add_heat_input("heating_w", "indoor")
    with pytest.raises(NetworkError, match="must have a heat capacity"):
        hold_setpoint(massless, inputs[["outdoor_c"]], 20.0)


def test_compiled_sections_equal_scipy_lfilter(rng):
    # scipy.signal.lfilter with b=[1], a=[1, -a_j] and zi = a_j z0 is the reference recursion.
    from thermorc.simulate import _sections_lfilter, first_order_sections

    a = np.array([0.999999, 0.93, 0.2, 1e-12])
    drive = rng.normal(size=(4, 5000))
    z0 = rng.normal(size=4)
    ours = np.empty_like(drive)
    ref = np.empty_like(drive)
    first_order_sections(a, drive, z0, ours)
    _sections_lfilter(a, drive, z0, ref)
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=1e-12)


def test_sensed_temperature_is_the_first_order_lag_of_lsim():
    # tau ds/dt = T - s with T linear between samples: scipy.signal.lsim of 1/(tau s + 1)
    # (linear interpolation of its input) on a 1-s grid is the reference.
    import scipy.signal

    from thermorc.simulate import sensed_temperature

    t = np.arange(0.0, 20000.0, 300.0)
    temperature = 20 + np.sin(t / 2000) + t / 10000
    fine = np.arange(0.0, t[-1] + 1, 1.0)
    _, ref, _ = scipy.signal.lsim(([1.0], [450.0, 1.0]), np.interp(fine, t, temperature), fine, X0=[450.0 * temperature[0]])
    np.testing.assert_allclose(sensed_temperature(temperature, 300.0, 450.0), ref[::300], atol=1e-9)
    np.testing.assert_array_equal(sensed_temperature(temperature, 300.0, 0.0), temperature)
