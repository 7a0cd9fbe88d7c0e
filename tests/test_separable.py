"""The separable form of the fit: response columns, the bounded linear solve, the optimum.

References outside thermorc: scipy.signal.lsim for the responses, scipy.optimize.lsq_linear
(bounded-variable least squares) for the linear solve, and a plain scipy.optimize.least_squares
over all parameters at once for the optimum (the separable problem has the same minimiser:
G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10(2), 1973).
"""

import math
import warnings

import numpy as np
import pytest
import scipy.optimize
import scipy.signal
from test_estimate import stochastic_log

from thermorc import estimate
from thermorc.network import PRESETS, Network
from thermorc.separable import ResponseBasis, preset_matrices, symmetric_modes

RC = {
    "1R1C": [5e-3, 3e7],
    "2R2C": [1e-3, 4e-3, 4e6, 6e7],
    "3R2C": [1.2e-3, 5e-3, 2e-2, 4e6, 6e7],
    "4R3C": [1.2e-3, 5e-3, 2e-2, 8e-4, 4e6, 6e7, 2e7],
}
# Nodes the sun heats in each preset (indoor first), as docs/models.md draws them.
SUN_NODES = {"1R1C": [0], "2R2C": [0, 1], "3R2C": [0, 1], "4R3C": [0, 2]}


@pytest.fixture(scope="module")
def data():
    log, _, _ = stochastic_log(seed=3, days=8, step_s=900.0)
    d = estimate.calibration_data(log)
    # Two segments, so the per-segment initial states are exercised.
    d.segments = [slice(0, 400), slice(420, len(d.y))]
    return d


@pytest.mark.parametrize("model", list(RC))
def test_preset_matrices_match_network(model):
    params = dict(zip(PRESETS[model].parameters, RC[model]))
    space = Network.from_preset(model, params).state_space()
    k, g_out, caps = preset_matrices(model, RC[model])
    np.testing.assert_allclose(k, space.k_reduced_w_per_k, rtol=1e-12)
    np.testing.assert_allclose(g_out, space.e_reduced[:, 0], rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(caps, space.capacitances_j_per_k, rtol=1e-12)


@pytest.mark.parametrize("model", list(RC))
@pytest.mark.parametrize("gains", ["constant", "day_night", "four_period"])
def test_columns_rebuild_the_lsim_response(data, model, gains):
    # The response to all inputs at once, from scipy.signal.lsim with linear interpolation of
    # the outdoor temperature and held powers (the two are run separately and added, since
    # lsim takes one interpolation for all inputs).
    rng = np.random.default_rng(0)
    sun_nodes = SUN_NODES[model]
    apertures = rng.uniform(1, 5, len(sun_nodes))
    # The periods by hand (not through gains_period_labels): day 07-23 h, or the four
    # periods morning 06-09, daytime 09-17, evening 17-23 and night 23-06 h.
    hour = data.index.hour
    label = {"constant": np.zeros(len(hour), dtype=int), "day_night": np.where((hour >= 7) & (hour < 23), 0, 1),
             "four_period": np.select([(hour >= 6) & (hour < 9), (hour >= 9) & (hour < 17), (hour >= 17) & (hour < 23)],
                                      [0, 1, 2], 3)}[gains]
    levels = rng.uniform(100, 400, label.max() + 1)
    hidden = rng.uniform(10, 18, 4)
    periods = None if gains == "constant" else (label, levels.size)
    basis = ResponseBasis(model, data, periods, np.full(len(data.y), -1), 0)
    rows = basis.rows(RC[model])
    coef = np.concatenate([apertures, levels, hidden[: basis.n_hidden]])
    modelled = rows[:, 0] + rows[:, 1:] @ coef
    k, g_out, caps = preset_matrices(model, RC[model])
    a = -k / caps[:, None]
    n = caps.size
    for seg_no, seg in enumerate(data.segments):
        u = data.u[seg]
        t = np.arange(seg.stop - seg.start) * data.step_s
        gain_w = levels[label[seg]]
        power = np.zeros((len(t), n))
        power[:, 0] = u[:, 1] + u[:, 3] + gain_w
        for node, aperture in zip(sun_nodes, apertures):
            power[:, node] += aperture * u[:, 2]
        # Hidden start states segment by segment, in node order within a segment.
        x0 = np.array([data.y[seg][0]] + list(hidden[seg_no * (n - 1):(seg_no + 1) * (n - 1)]))
        held = scipy.signal.lsim((a, np.diag(1 / caps), np.eye(n)[:1], np.zeros((1, n))), power, t, X0=x0, interp=False)[1]
        ramp = scipy.signal.lsim((a, (g_out / caps)[:, None], np.eye(n)[:1], np.zeros((1, 1))), u[:, 0], t, interp=True)[1]
        np.testing.assert_allclose(modelled[seg], held + ramp, atol=1e-7)


def _blocks_of_four(data):
    """Blocks of four rows within each segment, numbered consecutively."""
    block_id = np.full(len(data.y), -1)
    for seg in data.segments:
        block_id[seg] = (np.arange(seg.stop - seg.start) + seg.start) // 4
    used = block_id >= 0
    block_id[used] = np.unique(block_id[used], return_inverse=True)[1]
    return block_id, int(block_id.max()) + 1


@pytest.mark.parametrize("model", list(RC))
def test_lagged_columns_are_the_lsim_sensor_reading_of_the_responses(data, model):
    # A sensor with a first-order lag, tau ds/dt = T - s, reads each response column; the
    # reference is scipy.signal.lsim of that system with T linear between samples, started at
    # s = T, segment by segment, then the same block means as the fit uses.
    rng = np.random.default_rng(1)
    block_id, n_blocks = _blocks_of_four(data)
    used = block_id >= 0
    # Uneven weights within the blocks, as where samples are missing.
    weight = np.where(used, rng.uniform(0.5, 1.5, len(block_id)), 0.0)
    weight[used] /= np.bincount(block_id[used], weights=weight[used])[block_id[used]]
    tau_s = 1500.0
    basis = ResponseBasis(model, data, None, block_id, n_blocks)
    plain = basis.rows(RC[model])
    basis.sensor_s = tau_s
    basis.row_weight = weight
    f, lin = basis.columns(RC[model])
    sensed = np.zeros_like(plain)
    for seg in data.segments:
        t = np.arange(seg.stop - seg.start) * data.step_s
        for col in range(plain.shape[1]):
            x = plain[seg, col]
            sensed[seg, col] = scipy.signal.lsim(([1.0 / tau_s], [1.0, 1.0 / tau_s]), x, t, X0=[x[0] * tau_s],
                                                 interp=True)[1]
    ref = np.stack([np.bincount(block_id[used], weights=(sensed[:, c] * weight)[used], minlength=n_blocks)
                    for c in range(plain.shape[1])], axis=1)
    scale = np.abs(ref).max(axis=0) + 1e-12
    assert np.all(np.abs(np.column_stack([f, lin]) - ref) <= 1e-7 * scale)
    # And rows() reads through the lag too.
    np.testing.assert_allclose(basis.rows(RC[model]), sensed, rtol=1e-7, atol=1e-9 * np.abs(sensed).max())


def test_bounded_linear_solve_matches_lsq_linear():
    # Random problems where the unbounded solution breaks a bound: the exact bounded answer
    # is that of scipy.optimize.lsq_linear (bounded-variable least squares).
    rng = np.random.default_rng(4)
    # The hidden starts unbounded first, then bounded too (0.5 to 2, which the true 1 and 3 and
    # the noise push against from both sides).
    for hidden_lo, hidden_hi in ((-np.inf, np.inf), (0.5, 2.0)):
        basis = ResponseBasis.__new__(ResponseBasis)
        basis._held = None  # the bounds held last time are tried first: reuse across trials on purpose
        basis._held_at = np.zeros(5)
        basis.n_solar, basis.n_gains, basis.n_hidden, basis.n_bounded = 2, 1, 2, 3
        basis.n_linear = 5
        basis.lower = np.array([0, 0, 0, hidden_lo, hidden_lo])
        basis.upper = np.array([np.inf, np.inf, np.inf, hidden_hi, hidden_hi])
        for trial in range(30):
            linear = rng.normal(size=(60, 5))
            basis.y_blocks = linear @ np.array([-1.0, 2.0, -0.5, 1.0, 3.0]) + rng.normal(0, 0.5, 60)
            coef, resid = basis.solve_linear(np.zeros(60), linear)
            ref = scipy.optimize.lsq_linear(linear, basis.y_blocks, bounds=(basis.lower, basis.upper), method="bvls")
            np.testing.assert_allclose(coef, ref.x, atol=1e-8)
            np.testing.assert_allclose(resid, basis.y_blocks - linear @ coef)


def test_projected_jacobian_with_a_start_held_at_a_bound(data):
    # With the hidden starts bounded so tightly that the solve holds them at a bound, the
    # projected residual's Jacobian (Golub and Pereyra 1973) must still be its derivative:
    # checked against central differences of the projected residual itself.
    model = "2R2C"
    block_id, n_blocks = _blocks_of_four(data)
    basis = ResponseBasis(model, data, None, block_id, n_blocks, state_bounds_c=(-50.0, -40.0))
    theta = np.log(RC[model])
    fixed, linear = basis.columns(np.exp(theta))
    coef, resid = basis.solve_linear(fixed, linear)
    n_fixed = basis.n_solar + basis.n_gains
    assert np.all(coef[n_fixed:] == -40.0) and basis._held[n_fixed:].all()
    jac = basis.projected_jacobian(theta, fixed, linear, coef)

    def projected(th):
        f, lin = basis.columns(np.exp(th))
        return basis.solve_linear(f, lin)[1]

    ref = np.empty_like(jac)
    for k in range(theta.size):
        h = 1e-5
        up, down = theta.copy(), theta.copy()
        up[k] += h
        down[k] -= h
        ref[:, k] = (projected(up) - projected(down)) / (2 * h)
    scale = np.abs(ref).max(axis=0)
    assert np.all(np.abs(jac - ref) <= 1e-4 * scale)


def test_separable_fit_reaches_the_full_least_squares_optimum():
    # A plain least_squares over every parameter (R, C, aperture, share, gains, initial
    # state) from the separable optimum must not find a lower cost: both solve one problem.
    log, _, _ = stochastic_log(seed=8, days=12, step_s=900.0)
    data = estimate.calibration_data(log)
    layout, sol, observed, _ = estimate._fit_output_error("2R2C", data, "constant", block=4)
    block_id, n_blocks = estimate._blocks(data, observed, 4)
    counts = np.bincount(block_id[block_id >= 0], minlength=n_blocks)

    def full(theta):
        yhat, _ = estimate._simulate_indoor(layout, theta, data)
        used = block_id >= 0
        return np.bincount(block_id[used], weights=data.y[used] - yhat[used], minlength=n_blocks) / counts

    np.testing.assert_allclose(full(sol.x), sol.fun, atol=1e-9)
    lower, upper = layout.bounds()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = scipy.optimize.least_squares(full, np.clip(sol.x, lower + 1e-9, upper - 1e-9), bounds=(lower, upper),
                                           x_scale="jac", max_nfev=200)
    assert ref.cost >= sol.cost * (1 - 1e-4)
    # And the Jacobian of the separable solution is the full problem's (finite differences).
    ref_jac = scipy.optimize.approx_fprime(sol.x, full, 1e-6)
    scale = np.max(np.abs(ref_jac), axis=0)
    assert np.all(np.abs(sol.jac - ref_jac) <= 1e-3 * scale + 1e-9)
    ua = estimate._ua_of("2R2C", [math.exp(t) for t in sol.x[:4]])
    assert ua == pytest.approx(layout.network(sol.x).heat_loss_coefficient_w_per_k()["total"], rel=1e-12)


def test_closed_form_modes_match_eigh():
    # numpy.linalg.eigh is the reference for the symmetric 2x2 eigenproblem.
    rng = np.random.default_rng(2)
    for _ in range(200):
        g = 10 ** rng.uniform(-4, 0, 3)
        s = np.array([[g[0] + g[2], -g[0]], [-g[0], g[0] + g[1]]])
        rates, v = symmetric_modes(s)
        ref_rates, ref_v = np.linalg.eigh(s)
        np.testing.assert_allclose(rates, ref_rates, rtol=1e-9)
        np.testing.assert_allclose(np.abs(v.T @ ref_v), np.eye(2), atol=1e-7)


def test_three_node_modes_rebuild_the_matrix():
    # Three nodes go to numpy.linalg.eigh; the modes must rebuild C^-1/2 K C^-1/2 and match
    # scipy.linalg.eigvals of C^-1 K (the rates of the network's state matrix).
    import scipy.linalg

    k, _, caps = preset_matrices("4R3C", RC["4R3C"])
    s = k / np.sqrt(np.outer(caps, caps))
    rates, v = symmetric_modes(s)
    np.testing.assert_allclose(v @ np.diag(rates) @ v.T, s, rtol=1e-10, atol=1e-12 * np.abs(s).max())
    ref = np.sort(scipy.linalg.eigvals(k / caps[:, None]).real)
    np.testing.assert_allclose(rates, ref, rtol=1e-9)


@pytest.mark.parametrize("model,gains", [("1R1C", "constant"), ("2R2C", "day_night"), ("3R2C", "constant"), ("2R2C", "four_period"),
                                         ("4R3C", "day_night")])
def test_holdout_from_the_responses_equals_predict(model, gains):
    # The held-out score continues the training simulation; thermorc.estimate.predict (a plain
    # run of the network through thermorc.simulate) must give the same RMSE.
    log, _, _ = stochastic_log(seed=5, days=28 if model == "4R3C" else 10, step_s=900.0)  # 4R3C needs 21 days
    data = estimate.calibration_data(log)
    cut = int(len(data.y) * 0.8)
    train = data.subset(cut)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = estimate.calibrate(train, model=model, gains=gains, energy_metrics=False)
    fast = estimate._holdout_rmse(res, data, cut, train)
    other = estimate.CalibrationData(train.index, train.y, train.u, [], train.step_s, train.has_solar)
    plain = estimate._holdout_rmse(res, data, cut, other)
    assert fast == pytest.approx(plain, rel=1e-9)
    assert 0 < fast < 3.0  # a finite score (the 1R1C misses this 2R2C home by about 1 K)
