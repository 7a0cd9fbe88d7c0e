"""ISO 13790:2008 5R1C network against the standard's own hourly equations.

All ISO 13790 constants, equations and Table 12 values used here are from memory (check-values
section 2: MEMORY); the Crank-Nicolson step below is written out from Annex C (eqs. C.1-C.11)
independently of thermorc's network code.
"""

import math
from pathlib import Path

import numpy as np
import pytest

from thermorc.construction import construction_ua, read_construction
from thermorc.errors import InputError
from thermorc.iso13790 import (
    TABLE_12,
    build_network,
    capacity_class,
    network_from_construction,
    parameters_from_construction,
    plausibility,
    plausibility_details,
)

DATA = Path(__file__).parent / "data"
MARROWBY = read_construction(DATA / "construction_marrowby.toml")


def iso_hourly_step(p, theta_m_prev, theta_e, phi_int, phi_sol, phi_hc, dt_s=3600.0):
    """ISO 13790:2008 Annex C, one hourly step, supply air at outdoor temperature."""
    a_t, a_m = p.a_t_m2, p.a_m_m2
    h_ve, h_is, h_w, h_ms, h_em = (p.h_ve_w_per_k, p.h_tr_is_w_per_k, p.h_tr_w_w_per_k, p.h_tr_ms_w_per_k,
                                   p.h_tr_em_w_per_k)
    phi_ia = 0.5 * phi_int + phi_hc  # C.1, heating to the air node
    phi_m = a_m / a_t * (0.5 * phi_int + phi_sol)  # C.2
    phi_st = (1 - a_m / a_t - h_w / (9.1 * a_t)) * (0.5 * phi_int + phi_sol)  # C.3
    h_1 = 1 / (1 / h_ve + 1 / h_is)  # C.6
    h_2 = h_1 + h_w  # C.7
    h_3 = 1 / (1 / h_2 + 1 / h_ms)  # C.8
    theta_sup = theta_e
    phi_mtot = phi_m + h_em * theta_e + h_3 * (phi_st + h_w * theta_e + h_1 * (phi_ia / h_ve + theta_sup)) / h_2  # C.5
    cm = p.c_m_j_per_k / dt_s  # C_m in W h/K per hour step, as C_m/3600 in the standard
    theta_m = (theta_m_prev * (cm - 0.5 * (h_3 + h_em)) + phi_mtot) / (cm + 0.5 * (h_3 + h_em))  # C.4
    theta_m_mean = 0.5 * (theta_m + theta_m_prev)  # C.9
    theta_s = (h_ms * theta_m_mean + phi_st + h_w * theta_e + h_1 * (theta_sup + phi_ia / h_ve)) / (h_ms + h_w + h_1)  # C.10
    theta_air = (h_is * theta_s + h_ve * theta_sup + phi_ia) / (h_is + h_ve)  # C.11
    return theta_m, theta_air, theta_s


def test_constants_and_table_12_as_recalled():
    # ISO 13790:2008 7.2.2.2 / 12.2.2 and Table 12 (MEMORY, check-values 2.1 and 2.3). The very
    # heavy class: 370 kJ/(m2 K) recalled; Corrado et al. (BS2007, from the FDIS) give 380.
    from thermorc import iso13790

    assert (iso13790.H_IS_W_PER_M2K, iso13790.H_MS_W_PER_M2K, iso13790.LAMBDA_AT) == (3.45, 9.1, 4.5)
    assert TABLE_12 == {
        "very light": (2.5, 80_000.0),
        "light": (2.5, 110_000.0),
        "medium": (2.5, 165_000.0),
        "heavy": (3.0, 260_000.0),
        "very heavy": (3.5, 370_000.0),
    }


def test_medium_class_regression_numbers():
    # check-values 2.3, COMPUTED for A_f = 100 m2, medium: A_m = 250 m2, C_m = 16.5 MJ/K,
    # A_t = 450 m2, H_tr,ms = 2275 W/K, H_tr,is = 1552.5 W/K.
    p = parameters_from_construction(MARROWBY, "medium")
    assert (p.a_m_m2, p.c_m_j_per_k, p.a_t_m2) == pytest.approx((250.0, 16.5e6, 450.0))
    assert (p.h_tr_ms_w_per_k, p.h_tr_is_w_per_k) == pytest.approx((2275.0, 1552.5))
    # H_tr,em in series with H_tr,ms gives back the opaque transmission (ISO 13790 12.2.2).
    series = 1 / (1 / p.h_tr_em_w_per_k + 1 / p.h_tr_ms_w_per_k)
    assert series == pytest.approx(construction_ua(MARROWBY)["opaque_ua_w_per_k"], rel=1e-12)


@pytest.mark.parametrize(
    "per_m2, expected",
    [(80e3, "very light"), (94e3, "very light"), (96e3, "light"), (165e3, "medium"), (200e3, "medium"),
     (260e3, "heavy"), (370e3, "very heavy"), (380e3, "very heavy")],
)
def test_capacity_class_picks_the_nearest_table_12_class(per_m2, expected):
    # Class edges half-way between the Table 12 values (ISO 13790 Table 12, MEMORY).
    out = capacity_class(per_m2 * 120.0, 120.0)
    assert out["class"] == expected
    assert out["within_table"]
    assert out["c_per_floor_area_j_per_m2k"] == pytest.approx(per_m2)


def test_capacity_class_flags_values_outside_the_table():
    assert not capacity_class(30e3 * 100, 100)["within_table"]
    assert not capacity_class(900e3 * 100, 100)["within_table"]
    with pytest.raises(InputError, match="floor area"):
        capacity_class(1e7, 0.0)


@pytest.mark.parametrize("capacity", [None, "medium", "very heavy"])
def test_steady_state_equals_the_iso_hourly_method(capacity):
    net, p = network_from_construction(MARROWBY, capacity)
    theta_e, phi_int, sol_w_m2, phi_hc = -3.0, 400.0, 150.0, 1800.0
    phi_sol = p.solar_aperture_m2 * sol_w_m2
    # The CN fixed point of C.4: theta_m = phi_mtot / (H_tr,3 + H_tr,em).
    theta_m = 10.0
    for _ in range(3):  # theta_m enters C.4 linearly, so the fixed point is found by one solve
        m1, _, _ = iso_hourly_step(p, theta_m, theta_e, phi_int, phi_sol, phi_hc)
        m2, _, _ = iso_hourly_step(p, theta_m + 1.0, theta_e, phi_int, phi_sol, phi_hc)
        theta_m = theta_m + (m1 - theta_m) / (1.0 - (m2 - m1))
    m_next, air, surface = iso_hourly_step(p, theta_m, theta_e, phi_int, phi_sol, phi_hc)
    assert m_next == pytest.approx(theta_m, abs=1e-12)
    ss = net.state_space()
    u = np.zeros(len(ss.inputs))
    values = {"outdoor_c": theta_e, "heating_w": phi_hc, "solar_w_m2": sol_w_m2, "internal_w": phi_int}
    for i, name in enumerate(ss.inputs):
        u[i] = values[name]
    x = np.linalg.solve(ss.a, -ss.b @ u)
    y = dict(zip(ss.outputs, ss.c @ x + ss.d @ u))
    assert y["mass"] == pytest.approx(theta_m, rel=1e-12)
    assert y["indoor"] == pytest.approx(air, rel=1e-12)
    assert y["surface"] == pytest.approx(surface, rel=1e-12)


def test_network_under_the_iso_time_step_reproduces_the_hourly_equations():
    # The ISO step is Crank-Nicolson on the mass node with inputs held at their hour's value
    # and air/surface from the mean mass temperature (C.9-C.11). The same scheme applied to
    # the network's reduced state space must give the same temperatures hour by hour.
    net, p = network_from_construction(MARROWBY)
    ss = net.state_space()
    rng = np.random.default_rng(13790)
    hours = 240
    theta_e = 5 + 8 * np.sin(np.arange(hours) * 2 * np.pi / 24) + rng.normal(0, 1, hours)
    sol = np.clip(600 * np.sin((np.arange(hours) % 24 - 6) * np.pi / 12), 0, None)
    phi_int = 300 + 200 * rng.random(hours)
    phi_hc = np.where(np.arange(hours) % 24 < 7, 0.0, 2500.0)
    dt = 3600.0
    n = ss.a.shape[0]
    lhs = np.eye(n) - 0.5 * dt * ss.a
    rhs = np.eye(n) + 0.5 * dt * ss.a
    x = np.array([18.0])
    m_iso = 18.0
    order = {name: i for i, name in enumerate(ss.outputs)}
    for k in range(hours):
        values = {"outdoor_c": theta_e[k], "heating_w": phi_hc[k], "solar_w_m2": sol[k], "internal_w": phi_int[k]}
        u = np.array([values[name] for name in ss.inputs])
        x_new = np.linalg.solve(lhs, rhs @ x + dt * ss.b @ u)
        y = ss.c @ (0.5 * (x + x_new)) + ss.d @ u
        m_iso_new, air, surface = iso_hourly_step(p, m_iso, theta_e[k], phi_int[k], p.solar_aperture_m2 * sol[k], phi_hc[k])
        assert x_new[0] == pytest.approx(m_iso_new, abs=1e-9)
        assert y[order["indoor"]] == pytest.approx(air, abs=1e-9)
        assert y[order["surface"]] == pytest.approx(surface, abs=1e-9)
        x, m_iso = x_new, m_iso_new


def test_time_constant_is_c_m_over_h_em_plus_h_3():
    # With massless air and surface nodes the mass node sees H_tr,em in parallel with
    # H_tr,3 (the series path through the surface and air nodes): tau = C_m/(H_tr,em + H_tr,3).
    net, p = network_from_construction(MARROWBY)
    tau = net.time_constants_s()
    assert len(tau) == 1
    assert tau[0] == pytest.approx(p.c_m_j_per_k / (p.h_tr_em_w_per_k + p.h_tr_3_w_per_k), rel=1e-12)
    assert tau[0] == pytest.approx(p.time_constant_s, rel=1e-12)
    # ISO's Crank-Nicolson decay per hour, (C/dt - H/2)/(C/dt + H/2), is the (1,1) Pade
    # approximant of exp(-dt/tau): error about (dt/tau)^3 / 12.
    h = p.h_tr_em_w_per_k + p.h_tr_3_w_per_k
    cn = (p.c_m_j_per_k / 3600 - 0.5 * h) / (p.c_m_j_per_k / 3600 + 0.5 * h)
    r = 3600 / tau[0]
    assert abs(cn - math.exp(-r)) <= r**3 / 12 * 1.01
    # A small air capacity adds a fast mode and hardly moves the slow one.
    net_air, _ = network_from_construction(MARROWBY, air_capacitance_j_per_k=1200 * MARROWBY.volume_m3)
    tau_air = net_air.time_constants_s()
    assert len(tau_air) == 2 and tau_air[1] < 600 and tau_air[0] == pytest.approx(tau[0], rel=0.02)


def test_heat_loss_from_the_air_node_by_series_parallel_reduction():
    # Steady state, heat injected at the air node: H_ve in parallel with H_tr,is in series
    # with (H_tr,w in parallel with the series H_tr,ms-H_tr,em = H_tr,op).
    net, p = network_from_construction(MARROWBY)
    h_behind = p.h_tr_w_w_per_k + p.h_tr_op_w_per_k
    expected = p.h_ve_w_per_k + 1 / (1 / p.h_tr_is_w_per_k + 1 / h_behind)
    assert net.heat_loss_coefficient_w_per_k("indoor")["total"] == pytest.approx(expected, rel=1e-12)
    # H_tr,is adds resistance, so the 5R1C loses a little less than the construction UA.
    assert expected < construction_ua(MARROWBY)["ua_w_per_k"]


def test_gain_split_follows_annex_c():
    net, p = network_from_construction(MARROWBY)
    gains = {}
    for channel, node, g in net.heat_inputs:
        gains[(channel, node)] = gains.get((channel, node), 0.0) + g
    f_m = p.a_m_m2 / p.a_t_m2
    f_s = 1 - f_m - p.h_tr_w_w_per_k / (9.1 * p.a_t_m2)
    assert gains[("internal_w", "indoor")] == 0.5
    assert gains[("internal_w", "mass")] == pytest.approx(0.5 * f_m)
    assert gains[("internal_w", "surface")] == pytest.approx(0.5 * f_s)
    assert gains[("solar_w_m2", "mass")] == pytest.approx(12.0 * f_m)  # aperture g A = 0.6 x 20 m2
    assert gains[("heating_w", "indoor")] == 1.0


def test_opaque_ua_beyond_h_tr_ms_is_rejected():
    small = read_construction(DATA / "construction_handcalc.toml")
    p = parameters_from_construction(small, "very light")
    assert p.h_tr_em_w_per_k > 0
    from dataclasses import replace

    tiny = replace(small, floor_area_m2=0.5)
    with pytest.raises(InputError, match="H_tr,ms"):
        parameters_from_construction(tiny, "very light")


def test_plausibility_agrees_and_disagrees():
    ua = construction_ua(MARROWBY)["ua_w_per_k"]
    c_m = parameters_from_construction(MARROWBY).c_m_j_per_k
    assert plausibility(ua * 1.1, c_m, 5.0, MARROWBY) == []
    far = plausibility_details(ua * 2.0, c_m, 5.0, MARROWBY)
    assert len(far["warnings"]) == 1 and "construction UA" in far["warnings"][0]
    assert far["ua_z"] > 2
    low_c = plausibility(ua, 3e6, 5.0, MARROWBY)  # 30 kJ/(m2 K): below every Table 12 class
    assert any("Table 12" in w for w in low_c)
    # A wide calibration interval covers a large difference: no warning.
    assert plausibility(ua * 1.5, c_m, 60.0, MARROWBY) == []


def test_build_network_without_windows_or_leakage():
    from dataclasses import replace

    p = parameters_from_construction(MARROWBY)
    net = build_network(replace(p, h_ve_w_per_k=0.0, h_tr_w_w_per_k=0.0))
    assert net.heat_loss_coefficient_w_per_k("indoor")["total"] == pytest.approx(
        1 / (1 / p.h_tr_is_w_per_k + 1 / p.h_tr_op_w_per_k))
