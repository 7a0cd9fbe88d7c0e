"""Kalman-filter likelihood and Van Loan process noise against outside references."""

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
import scipy.stats
from statsmodels.tsa.statespace.kalman_filter import KalmanFilter

from thermorc.errors import InputError
from thermorc.kalman import innovations_loglike, kalman_loglike, process_noise, steady_state_filter
from thermorc.network import Network
from thermorc.simulate import discretise


# --------------------------------------------------------------------------- reference models
def two_r_two_c(dt_s=300.0):
    """A 2R2C home (parameters common practice for an ordinary house) discretised like the
    simulator: first-order hold for the outdoor temperature, zero-order hold for heat inputs."""
    net = Network.from_preset(
        "2R2C", r_indoor_envelope_k_per_w=0.0015, r_envelope_outdoor_k_per_w=0.006,
        c_indoor_j_per_k=3e6, c_envelope_j_per_k=3e7, solar_aperture_m2=4.0,
    )
    space = net.state_space()
    ad, b0, b1 = discretise(space.a, space.b, dt_s, "foh")
    _, b0z, _ = discretise(space.a, space.b, dt_s, "zoh")
    nb = space.n_boundaries
    b0 = np.concatenate([b0[:, :nb], b0z[:, nb:]], axis=1)
    b1 = np.concatenate([b1[:, :nb], np.zeros_like(b1[:, nb:])], axis=1)
    c_row = np.array([1.0 if s == "indoor" else 0.0 for s in space.states])
    return space, ad, b0, b1, c_row


def inputs_for(space, n_rows, dt_s, rng):
    t_h = np.arange(n_rows) * dt_s / 3600
    cols = []
    for name in space.inputs:
        if name == "outdoor_c":
            cols.append(3 + 6 * np.sin(2 * np.pi * (t_h - 15) / 24) + np.cumsum(rng.normal(0, 0.03, n_rows)))
        elif name.endswith("_w_m2"):
            cols.append(np.clip(500 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None))
        else:
            cols.append(np.repeat(rng.uniform(0, 2000, n_rows // 6 + 1), 6)[:n_rows])
    return np.column_stack(cols)


def simulate_noisy(ad, b0, b1, c_row, q_d, r_meas, u, x0, rng):
    n_rows, n = u.shape[0], ad.shape[0]
    x = np.empty((n_rows, n))
    x[0] = x0
    chol = np.linalg.cholesky(q_d)
    for k in range(n_rows - 1):
        x[k + 1] = ad @ x[k] + b0 @ u[k] + b1 @ u[k + 1] + chol @ rng.standard_normal(n)
    return x @ c_row + rng.normal(0, math.sqrt(r_meas), n_rows)


def statsmodels_loglike(ad, b0, b1, c_row, q_d, r_meas, y, u, x0, p0):
    """statsmodels' state-space Kalman filter (alpha_{t+1} = T alpha_t + c_t + R eta_t), NaN = missing."""
    n_rows, n = u.shape[0], ad.shape[0]
    kf = KalmanFilter(k_endog=1, k_states=n, k_posdef=n)
    kf.bind(np.asarray(y, dtype=float).reshape(-1, 1))
    kf["design"] = c_row[None, :]
    kf["obs_cov"] = np.array([[r_meas]])
    kf["transition"] = ad
    kf["selection"] = np.eye(n)
    kf["state_cov"] = q_d
    intercept = np.zeros((n, n_rows))
    intercept[:, :-1] = (u[:-1] @ b0.T + u[1:] @ b1.T).T
    kf["state_intercept"] = intercept
    kf.initialize_known(np.asarray(x0, dtype=float), np.asarray(p0, dtype=float))
    res = kf.filter()
    return float(res.llf_obs.sum()), res


@pytest.fixture
def home(rng):
    dt = 300.0
    space, ad, b0, b1, c_row = two_r_two_c(dt)
    ad_vl, q_d = process_noise(space.a, [2e-6, 2e-7], dt)  # [K² s⁻¹], invented noise intensities
    r_meas = 0.05**2
    n_rows = 2000
    u = inputs_for(space, n_rows, dt, rng)
    x0 = np.array([20.0, 12.0])
    y = simulate_noisy(ad, b0, b1, c_row, q_d, r_meas, u, x0, rng)
    return dict(ad=ad, ad_vl=ad_vl, b0=b0, b1=b1, c_row=c_row, q_d=q_d, r_meas=r_meas, y=y, u=u,
                x0=x0 + np.array([0.3, -1.0]), p0=np.diag([0.5, 4.0]))


def _args(h, y=None):
    return (h["ad"], h["b0"], h["b1"], h["c_row"], h["q_d"], h["r_meas"], h["y"] if y is None else y,
            h["u"], h["x0"], h["p0"])


# --------------------------------------------------------------------------- Van Loan
def test_van_loan_scalar_matches_analytic_integral():
    # check-values.md section 9 (COMPUTED): R = 0.005 K/W, C = 1e7 J/K, dt = 3600 s,
    # sigma^2 = 1e-4 K²/s -> Q_d = 0.33528063 K², equal to sigma^2 (e^{2 a dt} - 1)/(2a).
    a = -1.0 / (0.005 * 1e7)
    ad, q_d = process_noise([[a]], [[1e-4]], 3600.0)
    analytic = 1e-4 * np.expm1(2 * a * 3600.0) / (2 * a)
    assert q_d[0, 0] == pytest.approx(analytic, rel=1e-12)
    assert q_d[0, 0] == pytest.approx(0.33528063, abs=5e-9)
    # check-values.md section 9: A_d = 0.9305308958 for the same 1R1C.
    assert ad[0, 0] == pytest.approx(0.9305308958, abs=1e-10)


def test_van_loan_2x2_matches_quadrature():
    # Reference: direct numerical quadrature of Q_d = int_0^dt e^{As} Q_c e^{A^T s} ds
    # (scipy.integrate.quad_vec), for a 2R2C state matrix with correlated noise.
    space = two_r_two_c()[0]
    q_c = np.array([[3e-6, 4e-7], [4e-7, 2e-7]])
    dt = 1800.0
    ad, q_d = process_noise(space.a, q_c, dt)

    def integrand(s):
        e = scipy.linalg.expm(space.a * s)
        return (e @ q_c @ e.T).ravel()

    ref, err = scipy.integrate.quad_vec(integrand, 0.0, dt, epsabs=0, epsrel=1e-12)
    np.testing.assert_allclose(q_d.ravel(), ref, rtol=1e-10)
    np.testing.assert_allclose(ad, scipy.linalg.expm(space.a * dt), rtol=1e-12)
    np.testing.assert_array_equal(q_d, q_d.T)
    assert np.all(np.linalg.eigvalsh(q_d) > 0)


def test_van_loan_transition_matches_discretise():
    # thermorc.simulate.discretise is checked against scipy.signal.cont2discrete in test_simulate.
    space, ad, *_ = two_r_two_c(900.0)
    ad_vl, _ = process_noise(space.a, [1e-6, 1e-6], 900.0)
    np.testing.assert_allclose(ad_vl, ad, rtol=1e-12)


def test_van_loan_rejects_bad_shapes_and_steps():
    with pytest.raises(InputError, match="expected"):
        process_noise([[-1.0, 0.0]], [1.0], 1.0)
    with pytest.raises(InputError, match="noise intensity"):
        process_noise(np.eye(2) * -1, np.eye(3), 1.0)
    with pytest.raises(InputError, match="dt_s"):
        process_noise([[-1.0]], [1.0], 0.0)


# --------------------------------------------------------------------------- likelihood vs exact density
def test_ar1_plus_noise_equals_multivariate_normal_density():
    # check-values.md section 9 (method): scalar AR(1) + measurement noise, 200 points,
    # stationary prior; the Kalman log-likelihood is the exact Gaussian log-density of the
    # whole series (scipy.stats.multivariate_normal.logpdf).
    rng = np.random.default_rng(9)
    phi, q, r, n_rows = 0.8, 0.5, 0.3, 200
    var_x = q / (1 - phi**2)
    x = np.empty(n_rows)
    x[0] = rng.normal(0, math.sqrt(var_x))
    for k in range(n_rows - 1):
        x[k + 1] = phi * x[k] + rng.normal(0, math.sqrt(q))
    y = x + rng.normal(0, math.sqrt(r), n_rows)
    lags = np.abs(np.subtract.outer(np.arange(n_rows), np.arange(n_rows)))
    cov = var_x * phi**lags + r * np.eye(n_rows)
    ref = scipy.stats.multivariate_normal(mean=np.zeros(n_rows), cov=cov).logpdf(y)
    u = np.zeros((n_rows, 0))
    for steady_after in (math.inf, None):
        out = kalman_loglike([[phi]], np.zeros((1, 0)), None, [1.0], [[q]], r, y, u, [0.0], [[var_x]],
                             steady_after=steady_after)
        assert out.loglike == pytest.approx(ref, abs=1e-9)
        assert out.n_used == n_rows
    assert innovations_loglike(out.innovations, out.innovation_var) == pytest.approx(ref, abs=1e-9)


def test_two_state_with_inputs_and_gaps_equals_multivariate_normal_density(rng):
    # Independent reference: y is jointly Gaussian with mean c x̄_k (deterministic response)
    # and covariance c Cov(x_i, x_j) c^T + r δ_ij, Cov(x_i, x_j) = A^{i-j} Σ_j; missing samples
    # are marginalised out by dropping their rows and columns (scipy.stats.multivariate_normal).
    dt = 900.0
    space, ad, b0, b1, c_row = two_r_two_c(dt)
    _, q_d = process_noise(space.a, [5e-6, 1e-6], dt)
    r_meas, n_rows = 0.02, 120
    u = inputs_for(space, n_rows, dt, rng)
    x0, p0 = np.array([19.0, 11.0]), np.diag([0.4, 2.0])
    y = simulate_noisy(ad, b0, b1, c_row, q_d, r_meas, u, x0, rng)
    y[30:45] = np.nan
    y[80] = np.nan
    mean = np.empty((n_rows, 2))
    sig = np.empty((n_rows, 2, 2))
    mean[0], sig[0] = x0, p0
    for k in range(n_rows - 1):
        mean[k + 1] = ad @ mean[k] + b0 @ u[k] + b1 @ u[k + 1]
        sig[k + 1] = ad @ sig[k] @ ad.T + q_d
    cov = np.empty((n_rows, n_rows))
    for j in range(n_rows):
        prop = sig[j]
        for i in range(j, n_rows):
            cov[i, j] = cov[j, i] = c_row @ prop @ c_row
            prop = ad @ prop
    cov += r_meas * np.eye(n_rows)
    keep = np.isfinite(y)
    ref = scipy.stats.multivariate_normal(mean[keep] @ c_row, cov[np.ix_(keep, keep)]).logpdf(y[keep])
    out = kalman_loglike(ad, b0, b1, c_row, q_d, r_meas, y, u, x0, p0, steady_after=math.inf)
    assert out.loglike == pytest.approx(ref, rel=1e-10)
    assert out.n_used == keep.sum()
    assert np.all(np.isnan(out.innovations[~keep]))


# --------------------------------------------------------------------------- statsmodels
def test_time_varying_filter_matches_statsmodels(home):
    # Reference: statsmodels.tsa.statespace.kalman_filter.KalmanFilter, known initialisation,
    # state_intercept carrying b0 u_k + b1 u_{k+1}.
    ref, res = statsmodels_loglike(*_args(home))
    out = kalman_loglike(*_args(home), steady_after=math.inf)
    assert out.loglike == pytest.approx(ref, rel=1e-8)
    assert out.n_steady == 0
    np.testing.assert_allclose(out.innovations, res.forecasts_error[0], rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(out.innovation_var, res.forecasts_error_cov[0, 0], rtol=1e-8)
    np.testing.assert_allclose(out.filtered_states, res.filtered_state.T, rtol=1e-9)
    np.testing.assert_allclose(out.predicted_states, res.predicted_state[:, :-1].T, rtol=1e-9)


def test_steady_state_switch_matches_statsmodels(home):
    # Same reference; the steady-state gain is exact only once P has converged, so the
    # difference must be tiny (bound chosen 1e-6 relative) and most steps must be steady.
    ref, _ = statsmodels_loglike(*_args(home))
    out = kalman_loglike(*_args(home))
    assert out.n_steady > 0.7 * len(home["y"])
    assert abs(out.loglike - ref) < 1e-6 * abs(ref)
    fixed = kalman_loglike(*_args(home), steady_after=200)
    assert fixed.n_steady == len(home["y"]) - 200
    assert abs(fixed.loglike - ref) < 1e-6 * abs(ref)


def test_missing_samples_match_statsmodels_nan_endog(home):
    # statsmodels treats NaN endog as missing (prediction only); compare with gaps at the
    # start, in the middle (one long, several short) and at the end, for both filter modes.
    y = home["y"].copy()
    y[:5] = np.nan
    y[400:700] = np.nan
    y[1000:1003] = np.nan
    y[1500] = np.nan
    y[-20:] = np.nan
    ref, res = statsmodels_loglike(*_args(home, y))
    exact = kalman_loglike(*_args(home, y), steady_after=math.inf)
    assert exact.loglike == pytest.approx(ref, rel=1e-8)
    assert exact.n_used == np.isfinite(y).sum()
    np.testing.assert_allclose(exact.innovation_var, res.forecasts_error_cov[0, 0], rtol=1e-8)
    fast = kalman_loglike(*_args(home, y))
    assert fast.n_steady > 0
    assert abs(fast.loglike - ref) < 1e-6 * abs(ref)
    # The covariance grows across a gap (prediction only) and shrinks once data return.
    gap_var = exact.innovation_var[400:700]
    assert np.all(np.diff(gap_var) > 0)
    assert exact.innovation_var[720] < gap_var[-1]
    # An explicit mask gives the same answer as NaN-marked gaps, whatever y holds there.
    filled = np.where(np.isfinite(y), y, 99.0)
    masked = kalman_loglike(*_args(home, filled), observed=np.isfinite(y))
    assert masked.loglike == fast.loglike


def test_steady_state_filter_is_the_limit_of_the_riccati_recursion(home):
    # References: the plain Riccati recursion run to convergence (Anderson & Moore 1979, ch. 4),
    # scipy.linalg.solve_discrete_are, and statsmodels' own steady-state detection.
    p_ss, gain, f_ss = steady_state_filter(home["ad"], home["c_row"], home["q_d"], home["r_meas"])
    c = home["c_row"]
    p = np.diag([1.0, 1.0])
    for _ in range(20000):
        pc = p @ c
        p = home["ad"] @ (p - np.outer(pc, pc) / (c @ pc + home["r_meas"])) @ home["ad"].T + home["q_d"]
    np.testing.assert_allclose(p_ss, p, rtol=1e-9)
    assert f_ss == pytest.approx(c @ p @ c + home["r_meas"], rel=1e-12)
    np.testing.assert_allclose(gain, p @ c / f_ss, rtol=1e-9)
    # The compiled doubling iteration against scipy.linalg.solve_discrete_are.
    p_ref, gain_ref, f_ref = steady_state_filter(home["ad"], c, home["q_d"], home["r_meas"], method="scipy")
    np.testing.assert_allclose(p_ss, p_ref, rtol=1e-12)
    np.testing.assert_allclose(gain, gain_ref, rtol=1e-12)
    assert f_ss == pytest.approx(f_ref, rel=1e-14)
    _, res = statsmodels_loglike(*_args(home))
    assert f_ss == pytest.approx(res.forecasts_error_cov[0, 0, -1], rel=1e-9)


# --------------------------------------------------------------------------- helpers and bad input
def test_innovations_loglike_is_the_gaussian_density():
    # scipy.stats.norm.logpdf summed is the reference; NaN innovations are left out.
    e = np.array([0.1, -0.4, np.nan, 1.2])
    f = np.array([0.2, 0.5, 0.3, 2.0])
    ref = scipy.stats.norm(0, np.sqrt(f[[0, 1, 3]])).logpdf(e[[0, 1, 3]]).sum()
    assert innovations_loglike(e, f) == pytest.approx(ref, rel=1e-14)
    assert innovations_loglike(e, np.array([0.2, 0.0, 0.3, 2.0])) == -math.inf


def test_bad_variance_gives_minus_infinity_not_an_exception(home):
    # An indefinite prior (infeasible parameters during a search) makes F <= 0.
    out = kalman_loglike(*_args(home)[:9], np.diag([-1.0, 1.0]))
    assert out.loglike == -math.inf
    assert "not positive" in out.message


def test_bad_input_is_rejected_with_a_message(home):
    args = list(_args(home))
    with pytest.raises(InputError, match="measurement-noise variance"):
        kalman_loglike(*args[:5], 0.0, *args[6:])
    with pytest.raises(InputError, match="inputs"):
        kalman_loglike(*args[:7], args[7][:-1], *args[8:])
    bad_u = args[7].copy()
    bad_u[3, 0] = np.nan
    with pytest.raises(InputError, match="non-finite"):
        kalman_loglike(*args[:7], bad_u, *args[8:])
    y = args[6].copy()
    y[7] = np.nan
    with pytest.raises(InputError, match="measurement 7"):
        kalman_loglike(*args[:6], y, *args[7:], observed=np.ones(len(y), bool))
    with pytest.raises(InputError, match="prior covariance"):
        kalman_loglike(*args[:9], np.eye(3))
    with pytest.raises(InputError, match="steady_after"):
        kalman_loglike(*args, steady_after=-3)


def test_direct_input_row_shifts_the_measurement(home):
    # y_k = c x_k + d u_k + e_k: adding d u_k to y and passing d_row gives the same likelihood.
    d_row = np.zeros(home["u"].shape[1])
    d_row[0] = 0.1
    base = kalman_loglike(*_args(home))
    shifted = kalman_loglike(*_args(home, home["y"] + home["u"] @ d_row), d_row=d_row)
    assert shifted.loglike == pytest.approx(base.loglike, rel=1e-12)


@pytest.mark.parametrize("tau_h", [0.5, 20.0, 400.0])
def test_doubling_matches_scipy_dare_over_time_constants(tau_h):
    # scipy.linalg.solve_discrete_are is the reference, from a fast air node to a slow mass
    # (time constants 0.5 h to 400 h, common practice for homes) at 5-minute steps.
    dt = 300.0
    a = np.array([[-1 / 1800.0, 1 / 1800.0], [1e-6, -1e-6 - 1 / (tau_h * 3600.0)]])
    ad, q_d = process_noise(a, [1e-5, 1e-8], dt)
    for r_meas in (1e-4, 0.1):
        p, gain, f = steady_state_filter(ad, [1.0, 0.0], q_d, r_meas)
        p_ref = scipy.linalg.solve_discrete_are(ad.T, np.array([[1.0], [0.0]]), q_d, np.array([[r_meas]]))
        np.testing.assert_allclose(p, p_ref, rtol=1e-12)
        assert f == pytest.approx(p_ref[0, 0] + r_meas, rel=1e-10)


@pytest.mark.parametrize("preset", ["1R1C", "2R2C", "3R2C"])
def test_random_presets_match_statsmodels(preset):
    # statsmodels KalmanFilter as reference over the preset family, with parameters drawn over
    # ordinary homes (tests/conftest.py, common practice), zero-order hold, 15-minute steps,
    # random gaps.
    from conftest import random_preset

    rng = np.random.default_rng({"1R1C": 11, "2R2C": 22, "3R2C": 33}[preset])
    net = random_preset(preset, rng)
    space = net.state_space()
    dt, n_rows = 900.0, 600
    ad, b0, b1 = discretise(space.a, space.b, dt, "zoh")
    n = ad.shape[0]
    _, q_d = process_noise(space.a, rng.uniform(1e-7, 1e-5, n), dt)
    c_row = np.array([1.0 if s == "indoor" else 0.0 for s in space.states])
    u = inputs_for(space, n_rows, dt, rng)
    x0 = np.full(n, 18.0)
    y = simulate_noisy(ad, b0, b1, c_row, q_d, 0.01, u, x0, rng)
    y[rng.random(n_rows) < 0.1] = np.nan
    p0 = np.eye(n)
    ref, _ = statsmodels_loglike(ad, b0, b1, c_row, q_d, 0.01, y, u, x0, p0)
    exact = kalman_loglike(ad, b0, b1, c_row, q_d, 0.01, y, u, x0, p0, steady_after=math.inf)
    fast = kalman_loglike(ad, b0, b1, c_row, q_d, 0.01, y, u, x0, p0)
    assert exact.loglike == pytest.approx(ref, rel=1e-8)
    assert abs(fast.loglike - ref) < 1e-6 * abs(ref)


def test_all_samples_missing_is_pure_prediction(home):
    # With no data the likelihood is empty (ln L = 0) and the predicted states follow the
    # noise-free state equation (analytic: E[x_{k+1}] = A_d E[x_k] + B_0 u_k + B_1 u_{k+1}).
    y = np.full(len(home["y"]), np.nan)
    out = kalman_loglike(*_args(home, y))
    assert out.loglike == 0.0 and out.n_used == 0
    x = home["x0"].copy()
    for k in range(5):
        np.testing.assert_allclose(out.predicted_states[k], x, rtol=1e-12)
        x = home["ad"] @ x + home["b0"] @ home["u"][k] + home["b1"] @ home["u"][k + 1]
