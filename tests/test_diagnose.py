"""Fit diagnostics against ASHRAE Guideline 14, statsmodels, scipy and hand-worked values."""

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.stats.sandwich_covariance import S_hac_simple, cov_hac_simple
from statsmodels.tsa.stattools import acf, acovf

from thermorc import diagnose as dg

# check-values.md section 1.2: COMPUTED test vector, also the docs example of the
# u-analytics prediction_errors page (mean error 0.25).
Y = [10, 12, 11, 13]
YHAT = [10.5, 11.5, 11, 12]


def ar1(n, phi, rng, scale=1.0):
    """AR(1) noise started from its stationary distribution."""
    e = rng.normal(0, scale, n)
    x = np.empty(n)
    x[0] = e[0] / math.sqrt(1 - phi**2)
    for t in range(1, n):
        x[t] = phi * x[t - 1] + e[t]
    return x


# ------------------------------------------------------------------ Guideline 14 metrics


@pytest.mark.parametrize("p, cv, nmbe", [(0, 5.3250, 2.1739), (1, 6.1488, 2.8986)])
def test_g14_vector(p, cv, nmbe):
    # check-values.md 1.2 COMPUTED vector (G14 Annex B form, n - p degrees of freedom).
    assert dg.cv_rmse_pct(Y, YHAT, n_params=p) == pytest.approx(cv, abs=5e-5)
    assert dg.nmbe_pct(Y, YHAT, n_params=p) == pytest.approx(nmbe, abs=5e-5)


def test_g14_sign_and_nan_pairs():
    # Measured above modelled -> positive NMBE (G14 sign, from memory; check-values.md 1.2).
    assert dg.nmbe_pct(Y, YHAT) > 0
    assert dg.nmbe_pct(YHAT, Y) < 0
    # A NaN on either side drops the pair and n counts only complete pairs, so padding the
    # COMPUTED vector with incomplete pairs leaves the published figures unchanged.
    y = Y + [np.nan, 14.0]
    yhat = YHAT + [9.0, np.nan]
    assert dg.cv_rmse_pct(y, yhat, n_params=1) == pytest.approx(6.1488, abs=5e-5)
    assert dg.nmbe_pct(pd.Series(y), np.array(yhat), n_params=0) == pytest.approx(2.1739, abs=5e-5)


def test_g14_errors():
    with pytest.raises(ValueError, match="about zero"):
        dg.cv_rmse_pct([1.0, -1.0, 0.0], [0.5, 0.5, 0.5])
    with pytest.raises(ValueError, match="about zero"):
        dg.nmbe_pct([0.0, 0.0, 0.0], [0.1, 0.0, 0.0])
    with pytest.raises(ValueError, match=r"n > p"):
        dg.cv_rmse_pct([10, 12, np.nan], [10, 11, 12], n_params=2)
    with pytest.raises(ValueError, match="differ in length"):
        dg.nmbe_pct([1, 2, 3], [1, 2])
    with pytest.raises(ValueError, match="n_params"):
        dg.nmbe_pct(Y, YHAT, n_params=-1)


def test_guideline14_table():
    # check-values.md 1.1 (VERIFIED, secondary copies of G14-2014).
    assert dg.GUIDELINE14 == {
        "hourly": {"cv_rmse_pct": 30.0, "nmbe_pct": 10.0},
        "monthly": {"cv_rmse_pct": 15.0, "nmbe_pct": 5.0},
    }


# ------------------------------------------------------------------ energy aggregation


def test_hourly_aggregation_hand_worked():
    # Hand-worked: 30-min interval-mean powers; hour 2 has a missing sample and is dropped.
    idx = pd.date_range("2025-01-06 00:00", periods=6, freq="30min", tz="UTC")
    measured = [1000, 2000, 500, np.nan, 1500, 1500]
    modelled = [1000, 1000, 500, 500, 1000, 2000]
    # Hour 1: (1000 + 2000) W * 1800 s = 5.4 MJ = 1.5 kWh measured; 2000 W * 1800 s = 1.0 kWh.
    # Hour 3: 1.5 kWh both. So y = [1.5, 1.5], yhat = [1.0, 1.5]: sum e = 0.5, sum e^2 = 0.25.
    out = dg.energy_fit_metrics(measured, modelled, idx, n_params=0)
    hourly = out["hourly"]
    assert hourly["n"] == 2
    assert hourly["cv_rmse_pct"] == pytest.approx(100 * math.sqrt(0.25 / 2) / 1.5, rel=1e-12)  # 23.570 %
    assert hourly["nmbe_pct"] == pytest.approx(100 * 0.5 / (2 * 1.5), rel=1e-12)  # 16.667 %
    # CV(RMSE) within 30 % but |NMBE| above 10 %: fails G14 hourly (check-values.md 1.1).
    assert hourly["meets_guideline14"] is False
    assert out["n_params"] == 0
    assert math.isnan(out["monthly"]["cv_rmse_pct"]) and "month" in out["monthly"]["note"]


def test_hours_with_missing_stamps_or_partial_start_are_dropped():
    # Hand-worked: stamps 00:30 ... 03:00 every 30 min with 02:30 deleted. The 00:00 hour is
    # half covered, 02:30 is missing, the 03:00 hour has only its first sample: only the
    # 01:00 hour (01:00, 01:30) is complete.
    idx = pd.date_range("2025-01-06 00:30", periods=6, freq="30min", tz="UTC").delete(4)
    power = np.full(len(idx), 1000.0)
    out = dg.energy_fit_metrics(power, power * 0.9, idx, n_params=0)
    assert out["hourly"]["n"] == 1
    # One hour: e = 0.1 kWh of 1.0 kWh -> NMBE = 10 %, CV = 10 % (formula of check-values.md 1.2).
    assert out["hourly"]["nmbe_pct"] == pytest.approx(10.0, rel=1e-12)
    assert out["hourly"]["cv_rmse_pct"] == pytest.approx(10.0, rel=1e-12)


def test_dst_fall_back_keeps_repeated_hour_apart():
    # America/New_York leaves DST at 02:00 EDT on 2025-11-02 (US rule, common practice):
    # 00:00 EDT to 03:00 EST is 4 elapsed hours of local clock, 01:00 occurring twice.
    idx = pd.date_range("2025-11-02 04:00", "2025-11-02 07:45", freq="15min", tz="UTC").tz_convert(
        "America/New_York"
    )
    rng = np.random.default_rng(3)
    measured = 1000 + rng.normal(0, 50, len(idx))
    out = dg.energy_fit_metrics(measured, measured - 10, idx, n_params=0)
    assert out["hourly"]["n"] == 4  # merged 01:00 hours would have 8 samples and be dropped


def test_monthly_hand_worked_and_coverage():
    # Hand-worked: hourly data over January (744 h) and February 2025 (672 h), plus 3 days of
    # March (< 90 % of the month, left out). Constant 1000 W measured; 900 W modelled in
    # January, exact elsewhere: monthly y = [744, 672], yhat = [669.6, 672] kWh.
    idx = pd.date_range("2025-01-01", "2025-03-03 23:00", freq="1h", tz="UTC")
    measured = np.full(len(idx), 1000.0)
    modelled = np.where(idx.month == 1, 900.0, 1000.0)
    out = dg.energy_fit_metrics(measured, modelled, idx, n_params=0)
    monthly = out["monthly"]
    y_mean = (744 + 672) / 2
    assert monthly["n"] == 2
    # G14 formulas (check-values.md 1.2) with e = [74.4, 0].
    assert monthly["cv_rmse_pct"] == pytest.approx(100 * math.sqrt(74.4**2 / 2) / y_mean, rel=1e-10)
    assert monthly["nmbe_pct"] == pytest.approx(100 * 74.4 / (2 * y_mean), rel=1e-10)  # 5.254 %
    assert monthly["meets_guideline14"] is False  # NMBE above 5 % (check-values.md 1.1)
    assert monthly["note"] is None
    assert out["hourly"]["n"] == len(idx)


def test_monthly_uses_local_calendar_and_needs_two_months():
    # Hand-worked: 1 Feb 00:00 in Tokyo (UTC+9, no DST) is 31 Jan 15:00 UTC. Data from
    # 31 Jan 15:00 UTC for 28 days is all of February in local time: a single month.
    idx = pd.date_range("2025-01-31 15:00", periods=28 * 24, freq="1h", tz="UTC").tz_convert("Asia/Tokyo")
    power = np.full(len(idx), 800.0)
    out = dg.energy_fit_metrics(power, power * 1.01, idx)
    assert out["monthly"]["n"] == 1
    assert math.isnan(out["monthly"]["nmbe_pct"])
    assert "longer data" in out["monthly"]["note"]
    assert out["hourly"]["nmbe_pct"] == pytest.approx(-1.0 * 672 / 671, rel=1e-12)  # p = 1: n/(n-1)


def test_energy_metrics_bad_input_and_no_heating():
    idx = pd.date_range("2025-01-06", periods=8, freq="15min")
    with pytest.raises(ValueError, match="tz-aware"):
        dg.energy_fit_metrics(np.ones(8), np.ones(8), idx)
    idx = idx.tz_localize("UTC")
    with pytest.raises(ValueError, match="lengths differ"):
        dg.energy_fit_metrics(np.ones(7), np.ones(8), idx)
    idx7 = pd.date_range("2025-01-06", periods=8, freq="7min", tz="UTC")
    with pytest.raises(ValueError, match="does not divide one hour"):
        dg.energy_fit_metrics(np.ones(8), np.ones(8), idx7)
    # Heating off throughout: mean energy zero -> NaN with a note, not an error.
    out = dg.energy_fit_metrics(np.zeros(8), np.zeros(8), idx)
    assert out["hourly"]["n"] == 2 and math.isnan(out["hourly"]["cv_rmse_pct"])
    assert "about zero" in out["hourly"]["note"]


# ------------------------------------------------------------------ temperature metrics


def test_temperature_metrics_hand_worked():
    # Hand-worked: e = [0.5, -1.0, 0.0, 2.0]; NaN pair dropped.
    m = dg.temperature_fit_metrics([20.5, 19.0, 21.0, 22.0, np.nan], [20.0, 20.0, 21.0, 20.0, 20.0])
    assert m["n"] == 4
    assert m["rmse_k"] == pytest.approx(math.sqrt((0.25 + 1 + 0 + 4) / 4), rel=1e-12)
    assert m["bias_k"] == pytest.approx(1.5 / 4, rel=1e-12)
    assert m["max_abs_k"] == 2.0
    # Differences do not depend on the zero of the scale: the same in kelvin (+273.15).
    k = dg.temperature_fit_metrics(np.array([20.5, 19.0]) + 273.15, np.array([20.0, 20.0]) + 273.15)
    c = dg.temperature_fit_metrics([20.5, 19.0], [20.0, 20.0])
    assert k["rmse_k"] == pytest.approx(c["rmse_k"], rel=1e-9)
    with pytest.raises(ValueError, match="no complete"):
        dg.temperature_fit_metrics([np.nan], [1.0])


# ------------------------------------------------------------------ residual checks


def test_autocorrelation_matches_statsmodels_acf():
    rng = np.random.default_rng(11)
    x = ar1(400, 0.7, rng) + 3.0
    # statsmodels.tsa.stattools.acf (biased estimator, demeaned).
    np.testing.assert_allclose(dg.autocorrelation(x, 30), acf(x, nlags=30, fft=False), rtol=1e-12, atol=1e-14)


def test_autocorrelation_with_gaps():
    rng = np.random.default_rng(12)
    x = ar1(300, 0.5, rng)
    # NaN at the ends only: same as trimming them (statsmodels acf of the trimmed series).
    padded = np.concatenate([[np.nan] * 5, x, [np.nan] * 3])
    np.testing.assert_allclose(dg.autocorrelation(padded, 10), acf(x, nlags=10, fft=False), rtol=1e-12)
    # Interior gaps: Parzen's pair-averaged autocovariance, as statsmodels acovf computes it
    # with missing="conservative", adjusted=True, times the (n - k)/n taper.
    gappy = x.copy()
    gappy[[20, 21, 22, 100, 150, 151, 299]] = np.nan
    n = np.isfinite(gappy).sum()
    ref = acovf(gappy, adjusted=True, missing="conservative", nlag=10, fft=False)
    expected = ref / ref[0] * (n - np.arange(11)) / n
    np.testing.assert_allclose(dg.autocorrelation(gappy, 10), expected, rtol=1e-12)


def test_ljung_box_matches_statsmodels():
    rng = np.random.default_rng(5)
    for x in (rng.normal(size=500), ar1(500, 0.3, rng)):
        ours = dg.ljung_box(x)
        ref = acorr_ljungbox(x, lags=[6, 12, 24])  # statsmodels.stats.diagnostic
        for h in (6, 12, 24):
            assert ours[h]["statistic"] == pytest.approx(ref.loc[h, "lb_stat"], rel=1e-10)
            assert ours[h]["p_value"] == pytest.approx(ref.loc[h, "lb_pvalue"], rel=1e-8, abs=1e-300)
    # model_df as in statsmodels; a single int lag.
    x = ar1(300, 0.2, rng)
    ours = dg.ljung_box(x, lags=10, model_df=2)
    ref = acorr_ljungbox(x, lags=[10], model_df=2)
    assert ours[10]["df"] == 8
    assert ours[10]["p_value"] == pytest.approx(ref.loc[10, "lb_pvalue"], rel=1e-8)
    # End NaNs dropped: same as statsmodels on the trimmed series.
    ours = dg.ljung_box(np.concatenate([[np.nan], x, [np.nan, np.nan]]), lags=(12,))
    assert ours[12]["statistic"] == pytest.approx(acorr_ljungbox(x, lags=[12]).loc[12, "lb_stat"], rel=1e-10)
    # Strongly correlated residuals are rejected (Ljung & Box 1978: power against AR(1)).
    assert dg.ljung_box(ar1(500, 0.8, rng))[24]["p_value"] < 1e-6
    with pytest.raises(ValueError, match="lag"):
        dg.ljung_box(x, lags=(0,))
    with pytest.raises(ValueError, match="below the number"):
        dg.ljung_box(x[:10], lags=(24,))


def test_effective_sample_size_ar1():
    rng = np.random.default_rng(7)
    # Analytic: for AR(1) with coefficient phi the variance of the mean is that of
    # n (1 - phi)/(1 + phi) independent values (Bretherton et al. 1999); phi = 0.6 -> n/4.
    x = ar1(20000, 0.6, rng)
    assert dg.effective_sample_size(x) / 20000 == pytest.approx(0.25, abs=0.02)
    # White noise: close to n, never above it.
    w = rng.normal(size=20000)
    assert 0.95 * 20000 < dg.effective_sample_size(w) <= 20000
    alternating = np.tile([1.0, -1.0], 50)
    assert dg.effective_sample_size(alternating) == 100


# ------------------------------------------------------------------ Newey-West covariance


def ols_ar1_case(rng, n=400):
    x = np.column_stack([np.ones(n), rng.normal(size=n), np.cumsum(rng.normal(size=n)) / 10])
    u = ar1(n, 0.7, rng) * (1 + 0.5 * np.abs(x[:, 1]))  # autocorrelated and heteroskedastic
    y = x @ np.array([1.0, 2.0, -0.5]) + u
    return x, y


@pytest.mark.parametrize("lags", [0, 3, 8])
def test_hac_matches_statsmodels(lags):
    rng = np.random.default_rng(21)
    x, y = ols_ar1_case(rng)
    res = sm.OLS(y, x).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": False})
    # statsmodels 0.15 base/covtype.py: HAC = cov_hac_simple(nlags=maxlags, Bartlett weights,
    # use_correction=False by default there): (X'X)^-1 S (X'X)^-1, no n/(n-k) factor.
    cov, bw = dg.hac_covariance(x, res.resid, bandwidth=lags)
    assert bw == lags
    np.testing.assert_allclose(cov, res.cov_params(), rtol=1e-10, atol=0)


def test_hac_default_bandwidth_and_gaps():
    rng = np.random.default_rng(22)
    x, y = ols_ar1_case(rng)
    res = sm.OLS(y, x).fit()
    # Default lag floor(4 (n/100)^(2/9)) = floor(4 * 4^(2/9)) = 5 for n = 400, as statsmodels
    # cov_hac_simple(nlags=None) uses.
    cov, bw = dg.hac_covariance(x, res.resid)
    assert bw == 5 == dg.newey_west_bandwidth(400)
    np.testing.assert_allclose(cov, cov_hac_simple(res, nlags=None, use_correction=False), rtol=1e-10)
    # NaN rows keep their place in time: the scores are zero there, so the middle matrix is
    # statsmodels' S_hac_simple of the zero-filled scores, the bread (X'X)^-1 of kept rows.
    e = res.resid.copy()
    gaps = [10, 11, 12, 200, 399]
    e[gaps] = np.nan
    keep = np.isfinite(e)
    scores = np.where(keep[:, None], x * np.nan_to_num(e)[:, None], 0.0)
    bread = np.linalg.inv(x[keep].T @ x[keep])
    expected = bread @ S_hac_simple(scores, nlags=4) @ bread
    cov, bw = dg.hac_covariance(x, e, bandwidth=4)
    np.testing.assert_allclose(cov, expected, rtol=1e-10)
    # Singular J'J (two equal columns): NaN covariance, not an exception.
    cov, _ = dg.hac_covariance(np.column_stack([x[:, 1], x[:, 1]]), res.resid, bandwidth=2)
    assert np.isnan(cov).all()
    with pytest.raises(ValueError, match="shape"):
        dg.hac_covariance(x[:-1], res.resid)


# ------------------------------------------------------------------ model comparison


def test_lr_test_aic_bic_against_statsmodels_ols():
    rng = np.random.default_rng(31)
    n = 200
    x1, x2 = rng.normal(size=n), rng.normal(size=n)
    y = 1 + 0.5 * x1 + 0.15 * x2 + rng.normal(size=n)
    small = sm.OLS(y, sm.add_constant(x1)).fit()
    big = sm.OLS(y, sm.add_constant(np.column_stack([x1, x2]))).fit()
    # Gaussian log-likelihood concentrated in sigma^2: statsmodels OLS llf.
    assert dg.gaussian_loglike_from_rss(big.ssr, n) == pytest.approx(big.llf, rel=1e-12)
    # AIC/BIC as statsmodels RegressionResults (k = number of coefficients).
    assert dg.aic(big.llf, 3) == pytest.approx(big.aic, rel=1e-12)
    assert dg.bic(big.llf, 3, n) == pytest.approx(big.bic, rel=1e-12)
    stat, p = dg.likelihood_ratio_test(small.llf, big.llf, 1)
    ref_stat, ref_p, ref_df = big.compare_lr_test(small)  # statsmodels
    assert stat == pytest.approx(ref_stat, rel=1e-10) and ref_df == 1
    assert p == pytest.approx(ref_p, rel=1e-10)
    assert p == pytest.approx(stats.chi2.sf(2 * (big.llf - small.llf), 1), rel=1e-12)  # Wilks 1938
    # Equal fits: statistic 0, p-value 1; a larger model that fits worse is a failed fit.
    assert dg.likelihood_ratio_test(-100.0, -100.0, 2) == (0.0, 1.0)
    assert dg.likelihood_ratio_test(-100.0, -100.0 - 1e-12, 2) == (0.0, 1.0)
    with pytest.raises(ValueError, match="not converged"):
        dg.likelihood_ratio_test(-100.0, -101.0, 1)
    with pytest.raises(ValueError, match="extra_params"):
        dg.likelihood_ratio_test(-100.0, -99.0, 0)


# ------------------------------------------------------------------ warnings


def test_correlation_warnings():
    corr = np.array([[1.0, 0.97, 0.1], [0.97, 1.0, -0.96], [0.1, -0.96, 1.0]])
    names = ["r_indoor_outdoor_k_per_w", "c_indoor_j_per_k", "solar_aperture_m2"]
    out = dg.correlation_warnings(corr, names)
    assert len(out) == 2
    assert "'r_indoor_outdoor_k_per_w' and 'c_indoor_j_per_k'" in out[0] and "+0.970" in out[0]
    assert "-0.960" in out[1] and "fewer parameters" in out[1] and "heating off" in out[1]
    assert dg.correlation_warnings(corr, names, threshold=0.99) == []


def test_interval_warnings():
    out = dg.interval_warnings([100.0, 1e7, 4.0], [90.0, 2e6, np.nan], [110.0, 2.5e7, np.nan],
                               ["ua", "c", "aperture"])
    assert len(out) == 2
    assert out[0].startswith("The interval of 'c'") and "wider than its value" in out[0]
    assert "'aperture'" in out[1] and "longer record" in out[1]
    # Width exactly equal to the value is not "wider".
    assert dg.interval_warnings([2.0], [1.0], [3.0], ["x"]) == []


def test_bound_warnings():
    names = ["a", "b", "c", "d"]
    values = [0.0, 5.0, 9.995, 1e-3]
    out = dg.bound_warnings(values, [0.0, 0.0, 0.0, 0.0], [np.inf, 10.0, 10.0, np.inf], names)
    # a: exactly at 0 (one-sided -> relative to max(|bound|, |value|)); c: within 1e-3 of the
    # span 10 from the upper bound; b, d are free.
    assert len(out) == 2
    assert out[0].startswith("'a' = 0 ended at its lower bound")
    assert "'c'" in out[1] and "upper bound" in out[1] and "fewer parameters" in out[1]
    assert dg.bound_warnings([11.0], 0.0, 10.0, ["e"])[0].startswith("'e' = 11 ended at its upper")


def test_indoor_excursion_of_a_setback_cycle_and_a_held_setpoint():
    # Hand-worked: 5-minute readings at 21 °C by day and 17 °C for 8 h a night give hourly
    # means of 21 (16 h a day) and 17 (8 h): the 5-95 % range is 4 K. A deadband of
    # +-0.25 K cycled within each hour leaves every hourly mean at the setpoint (range 0).
    index = pd.date_range("2024-01-01", periods=14 * 288, freq="5min")
    setback = np.where(index.hour < 8, 17.0, 21.0)
    assert dg.indoor_excursion_k(setback, index) == pytest.approx(4.0)
    held = 21.0 + 0.25 * np.sign(np.sin(2 * np.pi * (np.arange(index.size) + 0.5) / 6))
    assert dg.indoor_excursion_k(held, index) == pytest.approx(0.0, abs=1e-12)
    assert len(dg.excursion_warnings(dg.indoor_excursion_k(held, index))) == 1
    assert dg.excursion_warnings(dg.indoor_excursion_k(setback, index)) == []
    # Gaps are ignored, and a log without readings has no excursion.
    gappy = setback.copy()
    gappy[: 288] = np.nan
    assert dg.indoor_excursion_k(gappy, index) == pytest.approx(4.0)
    assert math.isnan(dg.indoor_excursion_k(np.full(index.size, np.nan), index))
    assert dg.excursion_warnings(math.nan) == []
