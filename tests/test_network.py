"""RC network core: matrices, reduction of massless nodes, heat loss coefficients, modes."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st

from thermorc.errors import NetworkError
from thermorc.network import PRESETS, Network, preset_parameters
from thermorc.simulate import simulate


def test_1r1c_time_constant_is_rc():
    # Lumped-capacitance solution: tau = R C (Incropera et al., Fundamentals of Heat and
    # Mass Transfer, 6th ed., sec. 5.1, eq. 5.7; edition from memory).
    net = Network.from_preset("1R1C", r_indoor_outdoor_k_per_w=0.005, c_indoor_j_per_k=1e7)
    tau = net.time_constants_s()
    assert tau.shape == (1,)
    assert tau[0] == pytest.approx(0.005 * 1e7, rel=1e-12)
    assert net.heat_loss_coefficient_w_per_k()["total"] == pytest.approx(200.0, rel=1e-12)


def test_2r2c_time_constants_match_closed_form_eigenvalues(rng):
    # Closed form of the eigenvalues of a 2x2 matrix: lambda = (tr -+ sqrt(tr^2 - 4 det)) / 2
    # (any linear algebra text), against the network's symmetric-form eigensolver.
    for _ in range(20):
        r1, r2 = rng.uniform(1e-4, 1e-2, 2)
        c1, c2 = rng.uniform(1e6, 1e8, 2)
        net = Network.from_preset(
            "2R2C", r_indoor_envelope_k_per_w=r1, r_envelope_outdoor_k_per_w=r2, c_indoor_j_per_k=c1, c_envelope_j_per_k=c2
        )
        a = np.array([[-1 / (r1 * c1), 1 / (r1 * c1)], [1 / (r1 * c2), -(1 / r1 + 1 / r2) / c2]])
        tr, det = np.trace(a), np.linalg.det(a)
        disc = np.sqrt(tr**2 - 4 * det)
        expected = np.sort(-2 / np.array([tr - disc, tr + disc]))[::-1]  # tau = -1/lambda
        np.testing.assert_allclose(net.time_constants_s(), expected, rtol=1e-10)
        np.testing.assert_allclose(net.state_space().a, a, rtol=1e-12)


def test_series_and_parallel_heat_loss_coefficients():
    # Resistances in series add, conductances in parallel add (Ohm's-law analogy of steady
    # conduction; Incropera et al., sec. 3.1, from memory).
    net = Network.from_preset(
        "3R2C",
        r_indoor_envelope_k_per_w=0.001,
        r_envelope_outdoor_k_per_w=0.004,
        r_indoor_outdoor_k_per_w=0.02,
        c_indoor_j_per_k=2e6,
        c_envelope_j_per_k=2e7,
    )
    expected = 1 / (0.001 + 0.004) + 1 / 0.02
    h = net.heat_loss_coefficient_w_per_k()
    assert h["total"] == pytest.approx(expected, rel=1e-12)
    assert h["outdoor_c"] == pytest.approx(expected, rel=1e-12)


def test_interior_node_carries_no_steady_loss():
    # 4R3C: the interior node hangs on the indoor node only, so in steady state no heat flows
    # through it and UA is the 3R2C's series-plus-parallel sum (Ohm's-law analogy of steady
    # conduction, common practice). Its step response to sun on the interior node against
    # scipy.signal.lsim of the state matrix written out by hand.
    import scipy.signal

    r_ie, r_eo, r_io, r_im, c_i, c_e, c_m = 0.001, 0.004, 0.02, 0.0008, 2e6, 2e7, 1e7
    net = Network.from_preset(
        "4R3C", r_indoor_envelope_k_per_w=r_ie, r_envelope_outdoor_k_per_w=r_eo, r_indoor_outdoor_k_per_w=r_io,
        r_indoor_interior_k_per_w=r_im, c_indoor_j_per_k=c_i, c_envelope_j_per_k=c_e, c_interior_j_per_k=c_m,
        solar_aperture_m2=4.0, solar_to_interior_share=0.75,
    )
    assert net.heat_loss_coefficient_w_per_k()["total"] == pytest.approx(1 / (r_ie + r_eo) + 1 / r_io, rel=1e-12)
    g_ie, g_eo, g_io, g_im = 1 / r_ie, 1 / r_eo, 1 / r_io, 1 / r_im
    a = np.array([[-(g_ie + g_io + g_im) / c_i, g_ie / c_i, g_im / c_i],
                  [g_ie / c_e, -(g_ie + g_eo) / c_e, 0.0],
                  [g_im / c_m, 0.0, -g_im / c_m]])
    b_sun = np.array([4.0 * 0.25 / c_i, 0.0, 4.0 * 0.75 / c_m])
    space = net.state_space()
    order = [space.states.index(n) for n in ("indoor", "envelope", "interior")]
    np.testing.assert_allclose(space.a[np.ix_(order, order)], a, rtol=1e-12)
    t = np.arange(0, 48 * 3600.0, 600.0)
    ref = scipy.signal.lsim((a, b_sun[:, None], np.eye(3)[:1], [[0.0]]), np.full(t.size, 500.0), t)[1]
    frame = pd.DataFrame({"outdoor_c": 0.0, "heating_w": 0.0, "solar_w_m2": 500.0, "internal_w": 0.0},
                         index=pd.date_range("2024-01-01", periods=t.size, freq="10min"))
    sim = simulate(net, frame, x0=[0.0, 0.0, 0.0], interval_means=False).temperatures_c["indoor"].to_numpy()
    np.testing.assert_allclose(sim, ref, atol=1e-8)


def test_two_boundaries_split_the_loss():
    net = Network(boundaries=("outdoor_c", "ground_c"), inputs=("heating_w",))
    net.add_node("indoor", 1e7).add_conductance("indoor", "outdoor_c", 150).add_conductance("indoor", "ground_c", 50)
    h = net.heat_loss_coefficient_w_per_k()
    assert h == pytest.approx({"total": 200.0, "outdoor_c": 150.0, "ground_c": 50.0})


def test_massless_node_elimination_equals_series_resistance():
    # A massless surface node between indoor and outdoor must act exactly as two resistances
    # in series (Kron reduction, Dorfler & Bullo 2013): same A, B as the 1R1C.
    net = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    net.add_node("indoor", 1e7).add_node("surface", 0.0)
    net.add_resistance("indoor", "surface", 0.002).add_resistance("surface", "outdoor_c", 0.003)
    net.add_heat_input("heating_w", "indoor")
    ref = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    ref.add_node("indoor", 1e7).add_resistance("indoor", "outdoor_c", 0.005).add_heat_input("heating_w", "indoor")
    a, b = net.state_space(), ref.state_space()
    np.testing.assert_allclose(a.a, b.a, rtol=1e-12)
    np.testing.assert_allclose(a.b, b.b, rtol=1e-12)
    # Surface temperature: voltage divider T_s = T_in - (T_in - T_out) * 0.002 / 0.005.
    np.testing.assert_allclose(a.c[1], [0.6], rtol=1e-12)
    np.testing.assert_allclose(a.d[1], [0.4, 0.0], rtol=1e-12, atol=1e-15)


def test_kron_reduction_keeps_slow_modes_of_tiny_capacitance_limit():
    # A massless node is the limit of a vanishing capacitance: the slow mode of a network with a
    # very small capacitance must approach that of the reduced network.
    def build(c_mid):
        net = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
        net.add_node("indoor", 5e6).add_node("mid", c_mid).add_node("mass", 3e7)
        net.add_conductance("indoor", "mid", 300).add_conductance("mid", "mass", 500)
        net.add_conductance("mid", "outdoor_c", 120).add_conductance("mass", "outdoor_c", 60)
        return net

    exact = build(0.0).time_constants_s()
    near = build(1.0).time_constants_s()[:2]
    np.testing.assert_allclose(near, exact, rtol=1e-5)


@pytest.mark.parametrize(
    "build, match",
    [
        (lambda n: n.add_node("indoor", -1.0), "expected >= 0"),
        (lambda n: n.add_node("indoor", float("nan")), "finite"),
        (lambda n: n.add_node("indoor", 1e7).add_resistance("indoor", "outdoor_c", 0.0), "expected > 0"),
        (lambda n: n.add_node("indoor", 1e7).add_resistance("indoor", "outdoor_c", -0.01), "expected > 0"),
        (lambda n: n.add_node("indoor", 1e7).add_conductance("indoor", "outdoor_c", float("inf")), "finite"),
        (lambda n: n.add_node("indoor", 1e7).add_conductance("indoor", "attic", 10), "neither a node"),
        (lambda n: n.add_node("indoor", 1e7).add_node("indoor", 1e6), "already used"),
    ],
)
def test_invalid_elements_are_refused(build, match):
    with pytest.raises(NetworkError, match=match):
        build(Network())


def test_disconnected_node_and_node_without_boundary_are_refused():
    net = Network().add_node("indoor", 1e7).add_node("loft", 1e6).add_conductance("indoor", "outdoor_c", 100)
    with pytest.raises(NetworkError, match="not connected to anything"):
        net.state_space()
    net = Network().add_node("a", 1e7).add_node("b", 1e6).add_conductance("a", "b", 100)
    with pytest.raises(NetworkError, match="no path to any boundary"):
        net.time_constants_s()
    with pytest.raises(NetworkError, match="no node with a heat capacity"):
        Network().add_node("a", 0.0).add_conductance("a", "outdoor_c", 1.0).state_space()


def test_preset_parameter_errors_name_the_parameters():
    with pytest.raises(NetworkError, match="needs parameter"):
        Network.from_preset("2R2C", r_indoor_envelope_k_per_w=0.001)
    with pytest.raises(NetworkError, match="has no parameter"):
        Network.from_preset("1R1C", r_indoor_outdoor_k_per_w=0.01, c_indoor_j_per_k=1e7, colour=3)
    with pytest.raises(NetworkError, match="unknown model"):
        Network.from_preset("5R4C")
    assert set(PRESETS) == {"1R1C", "2R2C", "3R2C", "4R3C"}
    assert "solar_aperture_m2" in preset_parameters("3R2C")


@st.composite
def random_networks(draw):
    """Random connected networks with some massless nodes (property tests)."""
    n = draw(st.integers(2, 6))
    caps = [draw(st.sampled_from([0.0, 1e5, 1e6, 1e7, 5e7])) for _ in range(n)]
    if all(c == 0 for c in caps):
        caps[0] = 1e7
    net = Network(boundaries=("outdoor_c", "ground_c"), inputs=("heating_w",))
    for i, c in enumerate(caps):
        net.add_node(f"n{i}", c)
    for i in range(1, n):  # a spanning chain keeps the graph connected
        net.add_conductance(f"n{i - 1}", f"n{i}", draw(st.floats(1.0, 2000.0)))
    for i in range(n):
        if draw(st.booleans()) or i == 0:
            net.add_conductance(f"n{i}", draw(st.sampled_from(["outdoor_c", "ground_c"])), draw(st.floats(1.0, 500.0)))
    net.add_heat_input("heating_w", "n0")
    return net


@settings(max_examples=60, deadline=None)
@given(random_networks())
def test_reduction_preserves_steady_state(net):
    # Steady state from the full (unreduced) Laplacian system must equal the reduced one:
    # the Schur complement is exact for the static problem (Dorfler & Bullo 2013).
    k, e, caps = net.matrices()
    u = np.array([3.0, 8.0, 1500.0])
    full = np.linalg.solve(k, e @ u)
    space = net.state_space()
    x = np.linalg.solve(space.k_reduced_w_per_k, space.e_reduced @ u)
    y = space.c @ x + space.d @ u
    np.testing.assert_allclose(y, full, rtol=1e-9, atol=1e-9)
    # The reduced matrix is symmetric and the modes decay: real, negative eigenvalues.
    np.testing.assert_allclose(space.k_reduced_w_per_k, space.k_reduced_w_per_k.T, rtol=1e-12, atol=1e-9)
    eig = np.linalg.eigvals(space.a)
    assert np.all(np.abs(eig.imag) < 1e-9 * np.abs(eig.real).max())
    np.testing.assert_allclose(np.sort(-1 / eig.real)[::-1], net.time_constants_s(), rtol=1e-7)


def test_extreme_stiffness_is_reported_as_precision_loss():
    # eigh resolves eigenvalues to about eps times the largest (Golub & Van Loan, ch. 8): a
    # network whose rates span 1e14 keeps about 2 digits in its slowest mode, and says so.
    from thermorc.errors import PrecisionWarning

    net = Network().add_node("indoor", 1e12).add_node("skin", 1e-2)
    net.add_conductance("indoor", "skin", 10.0).add_conductance("skin", "outdoor_c", 10.0)
    with pytest.warns(PrecisionWarning, match="orders of magnitude"):
        taus = net.time_constants_s()
    assert np.all(np.isfinite(taus))
    # Ordinary homes stay silent (time constants minutes to weeks).
    import warnings as _warnings

    with _warnings.catch_warnings():
        _warnings.simplefilter("error", PrecisionWarning)
        Network.from_preset("2R2C", r_indoor_envelope_k_per_w=1e-3, r_envelope_outdoor_k_per_w=5e-3,
                            c_indoor_j_per_k=1e5, c_envelope_j_per_k=1e9).time_constants_s()


def test_ground_share_is_one_equivalent_boundary_temperature():
    # In a linear network g(1-f)(To - T) + g f (Tg - T) = g (Teq - T) with
    # Teq = (1-f) To + f Tg (superposition; analytic), so leading a share f of every outdoor
    # conductance to a ground must give the same temperatures as the whole network driven by
    # Teq, and split the heat loss coefficient f : 1-f.
    from thermorc.network import with_ground
    from thermorc.simulate import simulate

    base = Network.from_preset("3R2C", r_indoor_envelope_k_per_w=0.001, r_envelope_outdoor_k_per_w=0.004,
                               r_indoor_outdoor_k_per_w=0.02, c_indoor_j_per_k=2e6, c_envelope_j_per_k=2e7)
    net = with_ground(base, 0.3)
    assert net.boundaries == ("outdoor_c", "ground_c")
    total = base.heat_loss_coefficient_w_per_k()["total"]
    h = net.heat_loss_coefficient_w_per_k()
    assert h["total"] == pytest.approx(total, rel=1e-12)
    assert h["ground_c"] == pytest.approx(0.3 * total, rel=1e-12)
    index = pd.date_range("2025-01-01", periods=3 * 96, freq="15min", tz="UTC")
    hours = np.arange(len(index)) / 4
    outdoor = 3 + 6 * np.sin(2 * np.pi * hours / 24)
    inputs = pd.DataFrame({"outdoor_c": outdoor, "heating_w": np.where(hours % 24 < 16, 3000.0, 0.0),
                           "solar_w_m2": 0.0, "internal_w": 200.0, "ground_c": 9.0}, index=index)
    split = simulate(net, inputs, x0=[20.0, 12.0]).temperatures_c
    equivalent = simulate(base, inputs.assign(outdoor_c=0.7 * outdoor + 0.3 * 9.0), x0=[20.0, 12.0]).temperatures_c
    np.testing.assert_allclose(split.to_numpy(), equivalent.to_numpy(), atol=1e-9)
    with pytest.raises(NetworkError, match="ground share"):
        with_ground(base, 1.0)
