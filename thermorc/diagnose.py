"""
Fit diagnostics: how well a calibrated model matches the measurements, and how far to trust it.

Pure functions used by the calibration stage to judge a fit:

- energy metrics of ASHRAE Guideline 14 (CV(RMSE), NMBE) on hourly and monthly energies,
  with the thresholds in :data:`GUIDELINE14`;
- temperature metrics (RMSE, bias, largest error) [K];
- residual checks: autocorrelation, effective sample size, the Ljung-Box test;
- a heteroskedasticity-and-autocorrelation-consistent (HAC, Newey-West) parameter covariance
  for least squares with serially correlated residuals;
- model comparison: likelihood-ratio test, AIC, BIC, the Gaussian log-likelihood of a
  least-squares fit;
- plain-words warnings about strongly correlated parameters, wide intervals and parameters
  stuck at a bound.

Nothing here reads files, prints or warns: values in, numbers and strings out. Missing values
(NaN) are ignored pairwise everywhere, and each result says how many values it used.

Residuals follow one sign convention throughout: measured minus modelled.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import stats

__all__ = [
    "GUIDELINE14",
    "MONTH_MIN_COVERAGE",
    "cv_rmse_pct",
    "nmbe_pct",
    "energy_fit_metrics",
    "temperature_fit_metrics",
    "autocorrelation",
    "effective_sample_size",
    "ljung_box",
    "hac_covariance",
    "newey_west_bandwidth",
    "likelihood_ratio_test",
    "gaussian_loglike_from_rss",
    "aic",
    "bic",
    "correlation_warnings",
    "interval_warnings",
    "bound_warnings",
]

#: Calibration thresholds of ASHRAE Guideline 14-2014 for whole-building calibrated
#: simulation [%]: NMBE within +/-5 % and CV(RMSE) at most 15 % against monthly data,
#: +/-10 % and 30 % against hourly data. Values read in secondary copies (mepvault.com,
#: "CV(RMSE) calibration of energy models"; unmethours.com question 15, citing G14-2002);
#: the clause (section 4.3 of the 2014 edition) is from memory.
GUIDELINE14 = {
    "hourly": {"cv_rmse_pct": 30.0, "nmbe_pct": 10.0},
    "monthly": {"cv_rmse_pct": 15.0, "nmbe_pct": 5.0},
}

#: Share of a calendar month's hours that must be complete for the month to count in the
#: monthly metrics. Guideline 14 sets no such figure; 0.9 is thermorc's choice ("full-ish").
MONTH_MIN_COVERAGE = 0.9

_HOUR_S = 3600.0
_J_PER_KWH = 3.6e6


# --------------------------------------------------------------------------------------------
# ASHRAE Guideline 14 energy metrics
# --------------------------------------------------------------------------------------------


def _paired(measured, modelled):
    """Both as float arrays of one shape, restricted to the pairs where neither is NaN."""
    y = np.asarray(measured, dtype=float).ravel()
    yhat = np.asarray(modelled, dtype=float).ravel()
    if y.shape != yhat.shape:
        raise ValueError(
            f"measured and modelled differ in length ({y.size} and {yhat.size}); "
            "expected one modelled value per measured value"
        )
    keep = np.isfinite(y) & np.isfinite(yhat)
    return y[keep], yhat[keep]


def _g14_parts(measured, modelled, n_params):
    """Residuals, mean of measured and n - p, after the checks both G14 metrics share."""
    if int(n_params) != n_params or n_params < 0:
        raise ValueError(f"n_params must be a whole number >= 0, got {n_params!r}")
    y, yhat = _paired(measured, modelled)
    n = y.size
    if n <= n_params:
        raise ValueError(
            f"only {n} complete measured/modelled pairs for {int(n_params)} parameters; "
            "CV(RMSE) and NMBE need more pairs than parameters (n > p)"
        )
    y_mean = y.mean()
    # "~0": the mean is lost in rounding next to the values themselves (or all are zero).
    if abs(y_mean) <= 1e-9 * max(np.abs(y).max(), np.finfo(float).tiny):
        raise ValueError(
            f"the mean of the measured values is {y_mean:g}, about zero, so CV(RMSE) and NMBE "
            "(both divided by it) are undefined; expected a period with heating use"
        )
    return y - yhat, y_mean, n - int(n_params)


def cv_rmse_pct(measured, modelled, n_params=1):
    r"""
    Coefficient of variation of the root-mean-square error, ASHRAE Guideline 14 form.

    Parameters
    ----------
    measured : array_like
        Measured values, e.g. hourly energies [kWh]. NaN marks a missing value.
    modelled : array_like
        Model values for the same periods [same unit as ``measured``].
    n_params : int, default 1
        Number of parameters p taken off the degrees of freedom. Guideline 14 uses the number
        of regression coefficients for regression baselines; for calibrated simulation p = 0
        is reported by Ruiz & Bandera [2] and p = 1 is common practice.

    Returns
    -------
    float
        CV(RMSE) [%], using only the pairs where neither value is NaN.

    Raises
    ------
    ValueError
        If the lengths differ, if n <= p after dropping NaN pairs, or if the mean of the
        measured values is about zero.

    Notes
    -----
    .. math:: \mathrm{CV(RMSE)} = 100\,\sqrt{\sum_i (y_i - \hat y_i)^2 / (n - p)} \,/\, |\bar y|

    The absolute value of :math:`\bar y` keeps the figure positive for negative quantities
    (thermorc's choice; heating energies are positive anyway).

    References
    ----------
    .. [1] ASHRAE, Guideline 14-2014: Measurement of Energy, Demand, and Water Savings.
       Atlanta: ASHRAE, 2014, Annex B (formula read in a secondary copy).
    .. [2] G. R. Ruiz and C. F. Bandera, "Validation of calibrated energy models: common
       errors," Energies, vol. 10, no. 10, 1587, 2017, doi:10.3390/en10101587.
    """
    e, y_mean, dof = _g14_parts(measured, modelled, n_params)
    return float(100.0 * math.sqrt(np.dot(e, e) / dof) / abs(y_mean))


def nmbe_pct(measured, modelled, n_params=1):
    r"""
    Normalised mean bias error, ASHRAE Guideline 14 form, measured minus modelled.

    Parameters
    ----------
    measured : array_like
        Measured values, e.g. hourly energies [kWh]. NaN marks a missing value.
    modelled : array_like
        Model values for the same periods [same unit as ``measured``].
    n_params : int, default 1
        Number of parameters p taken off the degrees of freedom (see :func:`cv_rmse_pct`).

    Returns
    -------
    float
        NMBE [%]. Positive means the model under-predicts (measured above modelled).

    Raises
    ------
    ValueError
        As :func:`cv_rmse_pct`.

    Notes
    -----
    .. math:: \mathrm{NMBE} = 100 \sum_i (y_i - \hat y_i) \,/\, ((n - p)\,\bar y)

    The sign (measured minus modelled) is Guideline 14's as we remember it; some secondary
    sources use modelled minus measured. Compare :math:`|\mathrm{NMBE}|` with the threshold.

    References
    ----------
    .. [1] ASHRAE, Guideline 14-2014: Measurement of Energy, Demand, and Water Savings.
       Atlanta: ASHRAE, 2014, Annex B (formula read in a secondary copy; sign from memory).
    """
    e, y_mean, dof = _g14_parts(measured, modelled, n_params)
    return float(100.0 * e.sum() / (dof * y_mean))


def _g14_block(measured, modelled, n_params, thresholds, min_n):
    """Metrics of one resolution; NaN with a note where they cannot be computed."""
    y, yhat = _paired(measured, modelled)
    out = {"cv_rmse_pct": math.nan, "nmbe_pct": math.nan, "n": int(y.size),
           "meets_guideline14": None, "note": None}
    if y.size < min_n:
        out["note"] = f"only {y.size} complete periods (need at least {min_n}); metrics not computed"
        return out
    try:
        out["cv_rmse_pct"] = cv_rmse_pct(y, yhat, n_params)
        out["nmbe_pct"] = nmbe_pct(y, yhat, n_params)
    except ValueError as exc:
        out["note"] = f"metrics not computed: {exc}"
        return out
    out["meets_guideline14"] = bool(
        out["cv_rmse_pct"] <= thresholds["cv_rmse_pct"]
        and abs(out["nmbe_pct"]) <= thresholds["nmbe_pct"]
    )
    return out


def _sample_step_s(index):
    """The grid step in seconds: the index frequency, or the most common spacing."""
    if index.freq is not None:
        try:
            return pd.Timedelta(index.freq).total_seconds()
        except (TypeError, ValueError):
            pass
    if len(index) < 2:
        raise ValueError("need at least two time stamps to know the sample interval")
    steps = np.diff(index.as_unit("ns").asi8) / 1e9
    values, counts = np.unique(steps, return_counts=True)
    return float(values[np.argmax(counts)])


def _local_hour_start_ns(index):
    """
    Absolute start [ns since epoch, UTC] of the local clock hour holding each stamp.

    Working in absolute time keeps the two 01:00 hours of a DST fall-back night apart, and
    using the local offset puts the boundaries at :00 local time also in zones whose offset
    is not a whole number of hours.
    """
    utc_ns = index.tz_convert("UTC").as_unit("ns").asi8
    local_ns = index.tz_localize(None).as_unit("ns").asi8
    hour_ns = int(_HOUR_S * 1e9)
    return utc_ns - np.mod(local_ns, hour_ns)


def energy_fit_metrics(measured_w, modelled_w, index, n_params=1):
    """
    Guideline 14 metrics of a heating-power fit, on hourly and calendar-monthly energies.

    Parameters
    ----------
    measured_w : array_like
        Measured heating power, the mean over the interval starting at each stamp. [W]
    modelled_w : array_like
        Modelled heating power on the same stamps. [W]
    index : pandas.DatetimeIndex
        tz-aware stamps of the interval starts, on a regular grid whose step divides one hour.
    n_params : int, default 1
        Parameters p taken off the degrees of freedom (see :func:`cv_rmse_pct`).

    Returns
    -------
    dict
        ``{"hourly": {...}, "monthly": {...}, "n_params": p}``; each resolution holds
        ``cv_rmse_pct``, ``nmbe_pct`` [%], ``n`` (periods used), ``meets_guideline14``
        (bool, or None when not computed) and ``note`` (None, or why the metrics are NaN).
        Energies are in kWh; the metrics are unitless.

    Raises
    ------
    ValueError
        If the index is not tz-aware, lengths differ, or the step does not divide one hour.

    Notes
    -----
    Hours are local clock hours of the index's time zone. An hour counts only when all its
    samples are present (every stamp of the hour on the grid, with neither value NaN);
    hours with any missing sample are dropped from both series. The energy of an hour is
    the sum of its powers times the step. A calendar month is the sum of its complete
    hours and counts only when these cover at least :data:`MONTH_MIN_COVERAGE` of the
    month; with fewer than two such months the monthly metrics are NaN with a note.
    Thresholds are :data:`GUIDELINE14`; NMBE is measured minus modelled.

    References
    ----------
    .. [1] ASHRAE, Guideline 14-2014: Measurement of Energy, Demand, and Water Savings.
       Atlanta: ASHRAE, 2014 (thresholds read in secondary copies).
    """
    if not isinstance(index, pd.DatetimeIndex) or index.tz is None:
        raise ValueError("index must be a tz-aware pandas.DatetimeIndex (interval starts)")
    y = np.asarray(measured_w, dtype=float).ravel()
    yhat = np.asarray(modelled_w, dtype=float).ravel()
    if not (y.size == yhat.size == len(index)):
        raise ValueError(
            f"measured ({y.size}), modelled ({yhat.size}) and index ({len(index)}) lengths differ"
        )
    step_s = _sample_step_s(index)
    per_hour = _HOUR_S / step_s
    if step_s <= 0 or abs(per_hour - round(per_hour)) > 1e-9:
        raise ValueError(
            f"sample step of {step_s:g} s does not divide one hour; expected a regular grid "
            "such as 5, 10, 15, 30 or 60 min"
        )
    per_hour = int(round(per_hour))

    # Exact duplicates would inflate the sample count of an hour; count distinct stamps.
    _, first = np.unique(index.as_unit("ns").asi8, return_index=True)
    first.sort()
    y, yhat = y[first], yhat[first]
    ok = np.isfinite(y) & np.isfinite(yhat)
    hours, code = np.unique(_local_hour_start_ns(index)[first], return_inverse=True)
    complete = np.bincount(code, weights=ok, minlength=hours.size) == per_hour
    to_kwh = step_s / _J_PER_KWH
    hour_y = np.bincount(code, weights=np.where(ok, y, 0.0), minlength=hours.size)[complete] * to_kwh
    hour_yhat = np.bincount(code, weights=np.where(ok, yhat, 0.0), minlength=hours.size)[complete] * to_kwh

    result = {"n_params": int(n_params)}
    result["hourly"] = _g14_block(hour_y, hour_yhat, n_params, GUIDELINE14["hourly"], 1)

    # Calendar months of the local clock, with their length in complete hours.
    local = pd.DatetimeIndex(pd.to_datetime(hours[complete], unit="ns", utc=True)).tz_convert(index.tz)
    month_key = np.asarray(local.year * 12 + local.month - 1, dtype=np.int64)
    months, month_code, counts = np.unique(month_key, return_index=False, return_inverse=True, return_counts=True)
    month_y = np.bincount(month_code, weights=hour_y, minlength=months.size)
    month_yhat = np.bincount(month_code, weights=hour_yhat, minlength=months.size)
    keep = np.zeros(months.size, dtype=bool)
    for i, (key, count) in enumerate(zip(months, counts)):
        period = pd.Period(year=int(key // 12), month=int(key % 12) + 1, freq="M")
        start = pd.Timestamp(period.start_time).tz_localize(index.tz, nonexistent="shift_forward")
        end = pd.Timestamp((period + 1).start_time).tz_localize(index.tz, nonexistent="shift_forward")
        hours_in_month = (end - start).total_seconds() / _HOUR_S
        keep[i] = count >= MONTH_MIN_COVERAGE * hours_in_month
    block = _g14_block(month_y[keep], month_yhat[keep], n_params, GUIDELINE14["monthly"], 2)
    if block["note"] is not None and keep.sum() < 2:
        block["note"] = (
            f"{int(keep.sum())} calendar month(s) with at least {MONTH_MIN_COVERAGE:.0%} of hours "
            "complete; monthly metrics need two or more (longer data)"
        )
    result["monthly"] = block
    return result


# --------------------------------------------------------------------------------------------
# Temperature metrics
# --------------------------------------------------------------------------------------------


def temperature_fit_metrics(measured_c, modelled_c):
    """
    Error of a modelled indoor temperature, measured minus modelled.

    Parameters
    ----------
    measured_c : array_like
        Measured temperature. [°C]
    modelled_c : array_like
        Modelled temperature at the same stamps. [°C]

    Returns
    -------
    dict
        ``rmse_k`` (root-mean-square error), ``bias_k`` (mean of measured - modelled),
        ``max_abs_k`` (largest absolute error) [K], and ``n`` (pairs used; NaN pairs are
        dropped).

    Raises
    ------
    ValueError
        If the lengths differ or no pair is complete.

    Notes
    -----
    No CV(RMSE) or NMBE here: both divide by the mean of the measured values, and the mean
    of a temperature depends on where the scale puts its zero (20 °C is 293.15 K and 68 °F),
    so the same fit would score differently in each unit. Temperature errors are reported
    in kelvin, a difference, which is the same in °C.
    """
    y, yhat = _paired(measured_c, modelled_c)
    if y.size == 0:
        raise ValueError("no complete measured/modelled temperature pairs (all NaN?)")
    e = y - yhat
    return {
        "rmse_k": float(np.sqrt(np.mean(e * e))),
        "bias_k": float(e.mean()),
        "max_abs_k": float(np.abs(e).max()),
        "n": int(y.size),
    }


# --------------------------------------------------------------------------------------------
# Residual checks
# --------------------------------------------------------------------------------------------


def _autocorrelation_parts(residuals, max_lag):
    x = np.asarray(residuals, dtype=float).ravel()
    if int(max_lag) != max_lag or max_lag < 0:
        raise ValueError(f"max_lag must be a whole number >= 0, got {max_lag!r}")
    max_lag = int(max_lag)
    ok = np.isfinite(x)
    n = int(ok.sum())
    if n < 2:
        raise ValueError(f"only {n} finite residuals; autocorrelation needs at least 2")
    if max_lag >= n:
        raise ValueError(f"max_lag {max_lag} must be below the number of finite residuals ({n})")
    xo = np.where(ok, x - x[ok].mean(), 0.0)
    c0 = np.dot(xo, xo)
    if c0 == 0:
        raise ValueError("all finite residuals are equal; autocorrelation is undefined")
    m = ok.astype(float)
    r = np.empty(max_lag + 1)
    pairs = np.empty(max_lag + 1, dtype=int)
    r[0], pairs[0] = 1.0, n
    for k in range(1, max_lag + 1):
        pairs[k] = int(np.dot(m[k:], m[:-k]))
        ck = np.dot(xo[k:], xo[:-k])
        # Parzen's mean over the complete pairs, rescaled by (n - k)/n like the usual
        # (biased) estimator, so that without gaps this is exactly the textbook r_k.
        r[k] = (ck / pairs[k]) / (c0 / n) * (n - k) / n if pairs[k] else math.nan
    return r, n, pairs


def autocorrelation(residuals, max_lag):
    r"""
    Sample autocorrelation of residuals on a regular grid, with gaps.

    Parameters
    ----------
    residuals : array_like
        Residuals in time order on a regular grid; NaN marks a missing value and keeps its
        place, so lags still count grid steps. [any unit]
    max_lag : int
        Highest lag [grid steps], below the number of finite residuals.

    Returns
    -------
    numpy.ndarray
        :math:`r_0 = 1, r_1, \dots, r_{max\_lag}` [unitless]; NaN for a lag with no complete
        pair.

    Notes
    -----
    With :math:`x_t` demeaned over the n finite values, :math:`m_k` the number of complete
    pairs at lag k and sums over those pairs,

    .. math:: r_k = \frac{\sum x_t x_{t+k} / m_k}{\sum x_t^2 / n}\,\frac{n - k}{n}

    the amplitude-modulated estimator of Parzen [2] times the usual taper. Without gaps
    :math:`m_k = n - k` and this is the textbook estimator :math:`\sum x_t x_{t+k} / \sum x_t^2`
    [1]; NaN only at the ends gives the same as trimming them.

    References
    ----------
    .. [1] G. E. P. Box, G. M. Jenkins, G. C. Reinsel and G. M. Ljung, Time Series Analysis:
       Forecasting and Control, 5th ed. Wiley, 2015, sec. 2.1.
    .. [2] E. Parzen, "On spectral analysis with missing observations and amplitude
       modulation," Sankhyā A, vol. 25, no. 4, pp. 383-392, 1963 (from memory).
    """
    return _autocorrelation_parts(residuals, max_lag)[0]


def effective_sample_size(residuals):
    r"""
    Number of independent values the residuals are worth, first-order autoregressive model.

    Parameters
    ----------
    residuals : array_like
        Residuals in time order on a regular grid; NaN for missing values. [any unit]

    Returns
    -------
    float
        :math:`n_{eff} = n (1 - r_1)/(1 + r_1)`, capped at n (the number of finite
        residuals) when :math:`r_1 < 0`. [count]

    Notes
    -----
    For an AR(1) process the variance of the mean is that of :math:`n_{eff}` independent
    values [1]. Hourly or finer residuals of a thermal model are often strongly correlated
    (r_1 near 1), so n_eff can be a small share of n: standard errors that assume
    independence are then too small by about :math:`\sqrt{n / n_{eff}}`.

    References
    ----------
    .. [1] C. S. Bretherton, M. Widmann, V. P. Dymnikov, J. M. Wallace and I. Bladé, "The
       effective number of spatial degrees of freedom of a time-varying field," J. Climate,
       vol. 12, no. 7, pp. 1990-2009, 1999 (equation number from memory).
    """
    r, n, _ = _autocorrelation_parts(residuals, 1)
    r1 = r[1]
    if not np.isfinite(r1):
        return float(n)
    if r1 <= -1 or r1 >= 1:
        return 0.0 if r1 >= 1 else float(n)
    return float(min(n, n * (1 - r1) / (1 + r1)))


def ljung_box(residuals, lags=(6, 12, 24), model_df=0):
    r"""
    Ljung-Box portmanteau test that residuals are uncorrelated.

    Parameters
    ----------
    residuals : array_like
        Residuals in time order on a regular grid; NaN for missing values (see
        :func:`autocorrelation`).
    lags : int or sequence of int, default (6, 12, 24)
        Number of autocorrelations h summed for each test [grid steps]. With hourly
        residuals the default looks a quarter, half and whole day ahead.
    model_df : int, default 0
        Degrees of freedom taken off for a fitted ARMA model of the residuals (p + q); 0 for
        the residuals of a physical model.

    Returns
    -------
    dict
        ``{h: {"statistic": Q, "p_value": p, "df": h - model_df}}`` for each h. A small
        p-value (say below 0.05) means the residuals are serially correlated: the model
        misses some dynamics, and least-squares standard errors are too small.

    Raises
    ------
    ValueError
        If a lag is not a whole number >= 1 above ``model_df`` or not below the number of
        finite residuals.

    Notes
    -----
    .. math:: Q(h) = n (n + 2) \sum_{k=1}^{h} \frac{r_k^2}{n - k}

    with n the number of finite residuals and :math:`r_k` from :func:`autocorrelation`;
    under the hypothesis of white noise Q follows :math:`\chi^2_{h - model\_df}` [1].

    References
    ----------
    .. [1] G. M. Ljung and G. E. P. Box, "On a measure of lack of fit in time series
       models," Biometrika, vol. 65, no. 2, pp. 297-303, 1978, doi:10.1093/biomet/65.2.297.
    """
    lag_list = [lags] if np.ndim(lags) == 0 else list(lags)
    if not lag_list:
        raise ValueError("lags is empty; expected one or more whole numbers >= 1")
    for h in lag_list:
        if int(h) != h or h < 1 or h <= model_df:
            raise ValueError(f"lag {h!r} must be a whole number >= 1 and above model_df ({model_df})")
    h_max = int(max(lag_list))
    r, n, _ = _autocorrelation_parts(residuals, h_max)
    k = np.arange(1, h_max + 1)
    terms = np.where(np.isfinite(r[1:]), r[1:] ** 2, 0.0) / (n - k)
    q_cum = n * (n + 2) * np.cumsum(terms)
    out = {}
    for h in lag_list:
        h = int(h)
        q = float(q_cum[h - 1])
        df = h - int(model_df)
        out[h] = {"statistic": q, "p_value": float(stats.chi2.sf(q, df)), "df": df}
    return out


# --------------------------------------------------------------------------------------------
# Parameter covariance robust to serial correlation
# --------------------------------------------------------------------------------------------


def newey_west_bandwidth(n):
    """
    Rule-of-thumb truncation lag of the Bartlett kernel, ``floor(4 (n/100)^(2/9))``.

    Parameters
    ----------
    n : int
        Number of observations used.

    Returns
    -------
    int
        Highest lag L with nonzero weight [grid steps].

    Notes
    -----
    This is the fixed pilot lag of the Newey-West (1994) automatic procedure for the
    Bartlett kernel (their :math:`n = 4 (T/100)^{2/9}`, from memory), and the default of
    statsmodels' ``S_hac_simple``. thermorc uses it as the bandwidth itself rather than
    the data-dependent second step of [1], which needs a weighting of the parameters that
    has no natural choice for physical RC parameters.

    References
    ----------
    .. [1] W. K. Newey and K. D. West, "Automatic lag selection in covariance matrix
       estimation," Rev. Econ. Stud., vol. 61, no. 4, pp. 631-653, 1994, doi:10.2307/2297912.
    """
    return int(math.floor(4.0 * (n / 100.0) ** (2.0 / 9.0)))


def hac_covariance(jacobian, residuals, bandwidth=None):
    r"""
    Newey-West covariance of least-squares parameters with correlated, uneven residuals.

    Parameters
    ----------
    jacobian : array_like, shape (n, k)
        Derivative of the model output (or of the residuals: the sign cancels) with respect
        to the k parameters, one row per time step, time on axis 0. [output unit per
        parameter unit]
    residuals : array_like, shape (n,)
        Residuals at the optimum, in time order on a regular grid. NaN rows (and rows with a
        non-finite Jacobian) are left out but keep their place in time. [output unit]
    bandwidth : int, optional
        Highest lag L with nonzero Bartlett weight [grid steps]. Default
        :func:`newey_west_bandwidth` of the number of rows used.

    Returns
    -------
    cov : numpy.ndarray, shape (k, k)
        Parameter covariance [parameter units squared]; all NaN when :math:`J^T J` is
        singular (parameters not identifiable from these data).
    bandwidth : int
        The L used.

    Notes
    -----
    With :math:`g_t = J_t^T e_t` (zero for left-out rows) and Bartlett weights
    :math:`w_l = 1 - l/(L+1)` [1]:

    .. math::
        S = \sum_t g_t g_t^T + \sum_{l=1}^{L} w_l \sum_t (g_t g_{t-l}^T + g_{t-l} g_t^T),
        \qquad \mathrm{cov} = (J^T J)^{-1} S (J^T J)^{-1}

    the sandwich for nonlinear least squares, linearised at the optimum. No small-sample
    factor such as n/(n - k) is applied; this matches statsmodels' ``cov_type="HAC"`` with
    ``use_correction=False``. The Bartlett weights keep S positive semi-definite [1].

    References
    ----------
    .. [1] W. K. Newey and K. D. West, "A simple, positive semi-definite, heteroskedasticity
       and autocorrelation consistent covariance matrix," Econometrica, vol. 55, no. 3,
       pp. 703-708, 1987, doi:10.2307/1913610.
    .. [2] W. K. Newey and K. D. West, "Automatic lag selection in covariance matrix
       estimation," Rev. Econ. Stud., vol. 61, no. 4, pp. 631-653, 1994, doi:10.2307/2297912.
    """
    jac = np.asarray(jacobian, dtype=float)
    if jac.ndim == 1:
        jac = jac[:, None]
    e = np.asarray(residuals, dtype=float).ravel()
    if jac.ndim != 2 or jac.shape[0] != e.size:
        raise ValueError(
            f"jacobian has shape {jac.shape} for {e.size} residuals; expected (n_residuals, n_params)"
        )
    ok = np.isfinite(e) & np.all(np.isfinite(jac), axis=1)
    n = int(ok.sum())
    k = jac.shape[1]
    if n <= k:
        raise ValueError(f"only {n} usable rows for {k} parameters; expected more rows than parameters")
    if bandwidth is None:
        bandwidth = newey_west_bandwidth(n)
    if int(bandwidth) != bandwidth or bandwidth < 0:
        raise ValueError(f"bandwidth must be a whole number >= 0, got {bandwidth!r}")
    bandwidth = int(bandwidth)
    j_ok = np.where(ok[:, None], jac, 0.0)
    g = j_ok * np.where(ok, e, 0.0)[:, None]
    s = g.T @ g
    for lag in range(1, min(bandwidth, e.size - 1) + 1):
        c = g[lag:].T @ g[:-lag]
        s += (1.0 - lag / (bandwidth + 1.0)) * (c + c.T)
    jtj = j_ok.T @ j_ok
    if np.linalg.cond(jtj) > 1.0 / np.finfo(float).eps:
        return np.full((k, k), np.nan), bandwidth
    bread = np.linalg.inv(jtj)
    cov = bread @ s @ bread
    return 0.5 * (cov + cov.T), bandwidth


# --------------------------------------------------------------------------------------------
# Model comparison
# --------------------------------------------------------------------------------------------


def likelihood_ratio_test(loglike_small, loglike_big, extra_params):
    r"""
    Likelihood-ratio test of a model against a larger one that contains it.

    Parameters
    ----------
    loglike_small : float
        Maximised log-likelihood of the smaller (nested) model. [unitless]
    loglike_big : float
        Maximised log-likelihood of the larger model, fitted to the same data. [unitless]
    extra_params : int
        How many more free parameters the larger model has (>= 1).

    Returns
    -------
    statistic : float
        :math:`2(\ell_{big} - \ell_{small})`, tiny negative values from rounding set to 0.
    p_value : float
        Chance of a statistic at least this large if the smaller model were true,
        :math:`\chi^2` with ``extra_params`` degrees of freedom [1]. Small (say < 0.05):
        the extra parameters are supported by the data.

    Raises
    ------
    ValueError
        If ``extra_params`` < 1 or the larger model fits clearly worse than the smaller
        one, which means its fit did not reach the optimum (it contains the smaller model).

    Notes
    -----
    The :math:`\chi^2` limit needs the smaller model to lie inside the larger one's
    parameter space, not on its edge (a resistance going to infinity, a capacity to zero);
    there the p-value is conservative. With serially correlated residuals the Gaussian
    likelihood of independent errors overstates the evidence: prefer a likelihood that
    models the correlation (e.g. a Kalman filter), or read the p-value with care.

    References
    ----------
    .. [1] S. S. Wilks, "The large-sample distribution of the likelihood ratio for testing
       composite hypotheses," Ann. Math. Statist., vol. 9, no. 1, pp. 60-62, 1938,
       doi:10.1214/aoms/1177732360.
    """
    if int(extra_params) != extra_params or extra_params < 1:
        raise ValueError(f"extra_params must be a whole number >= 1, got {extra_params!r}")
    stat = 2.0 * (float(loglike_big) - float(loglike_small))
    if stat < 0:
        scale = max(1.0, abs(float(loglike_big)), abs(float(loglike_small)))
        if stat < -1e-8 * scale:
            raise ValueError(
                f"the larger model's log-likelihood ({loglike_big:g}) is below the smaller "
                f"model's ({loglike_small:g}); its fit has not converged (restart it from the "
                "smaller model's optimum)"
            )
        stat = 0.0
    return stat, float(stats.chi2.sf(stat, int(extra_params)))


def gaussian_loglike_from_rss(rss, n):
    r"""
    Maximised log-likelihood of a least-squares fit with independent Gaussian errors.

    Parameters
    ----------
    rss : float
        Residual sum of squares at the optimum. [output unit squared]
    n : int
        Number of residuals.

    Returns
    -------
    float
        :math:`-\frac{n}{2}\left(\ln(2\pi\,\mathrm{RSS}/n) + 1\right)`, the error variance
        concentrated out at its estimate RSS/n. [unitless]

    Notes
    -----
    The value depends on the output unit through RSS (only differences between models
    fitted to the same data mean anything).
    """
    if n < 1 or rss <= 0:
        raise ValueError(f"need n >= 1 and rss > 0, got n={n!r}, rss={rss!r}")
    return float(-0.5 * n * (math.log(2.0 * math.pi * rss / n) + 1.0))


def aic(loglike, n_params):
    r"""
    Akaike information criterion, :math:`2k - 2\ell`; smaller is better.

    Parameters
    ----------
    loglike : float
        Maximised log-likelihood. [unitless]
    n_params : int
        Number of estimated parameters k (count the error variance if it was estimated).

    Returns
    -------
    float
        AIC. [unitless]

    References
    ----------
    .. [1] H. Akaike, "A new look at the statistical model identification," IEEE Trans.
       Autom. Control, vol. 19, no. 6, pp. 716-723, 1974, doi:10.1109/TAC.1974.1100705.
    """
    return float(2.0 * n_params - 2.0 * loglike)


def bic(loglike, n_params, n):
    r"""
    Bayesian (Schwarz) information criterion, :math:`k \ln n - 2\ell`; smaller is better.

    Parameters
    ----------
    loglike : float
        Maximised log-likelihood. [unitless]
    n_params : int
        Number of estimated parameters k.
    n : int
        Number of observations. With strongly correlated residuals the effective number
        (:func:`effective_sample_size`) is the more honest choice.

    Returns
    -------
    float
        BIC. [unitless]

    References
    ----------
    .. [1] G. Schwarz, "Estimating the dimension of a model," Ann. Statist., vol. 6, no. 2,
       pp. 461-464, 1978, doi:10.1214/aos/1176344136.
    """
    if n < 1:
        raise ValueError(f"n must be >= 1, got {n!r}")
    return float(n_params * math.log(n) - 2.0 * loglike)


# --------------------------------------------------------------------------------------------
# Plain-words warnings
# --------------------------------------------------------------------------------------------

_MORE_DATA = (
    "Try a model with fewer parameters, add periods with the heating off (free-floating "
    "indoor temperature), or use a longer record."
)


def correlation_warnings(corr_matrix, names, threshold=0.95):
    """
    Warnings for pairs of parameter estimates that are strongly correlated.

    Parameters
    ----------
    corr_matrix : array_like, shape (k, k)
        Correlation matrix of the estimates. [unitless]
    names : sequence of str
        Parameter names, in the matrix order.
    threshold : float, default 0.95
        Absolute correlation at or above which a pair is reported (common practice).

    Returns
    -------
    list of str
        One sentence per pair, empty when none is above the threshold.
    """
    corr = np.asarray(corr_matrix, dtype=float)
    names = list(names)
    if corr.shape != (len(names), len(names)):
        raise ValueError(f"correlation matrix of shape {corr.shape} for {len(names)} names")
    out = []
    for i in range(len(names)):
        for j in range(i + 1, len(names)):
            r = corr[i, j]
            if np.isfinite(r) and abs(r) >= threshold:
                out.append(
                    f"Parameters '{names[i]}' and '{names[j]}' are strongly correlated "
                    f"(r = {r:+.3f}): the data do not tell them apart, so each is uncertain "
                    f"even if the fit is good. {_MORE_DATA}"
                )
    return out


def interval_warnings(values, lows, highs, names):
    """
    Warnings for parameters whose interval is wider than the value itself.

    Parameters
    ----------
    values : array_like
        Estimates. [parameter units]
    lows, highs : array_like
        Lower and upper ends of each estimate's interval (e.g. 95 %). [parameter units]
    names : sequence of str
        Parameter names.

    Returns
    -------
    list of str
        One sentence per poorly determined parameter (interval width above the absolute
        value, or an interval that could not be computed).
    """
    v, lo, hi = (np.asarray(a, dtype=float).ravel() for a in (values, lows, highs))
    names = list(names)
    if not (v.size == lo.size == hi.size == len(names)):
        raise ValueError("values, lows, highs and names must have the same length")
    out = []
    for name, x, a, b in zip(names, v, lo, hi):
        if not (np.isfinite(a) and np.isfinite(b)):
            out.append(
                f"No interval could be computed for '{name}' (= {x:.4g}): the data do not "
                f"determine it. {_MORE_DATA}"
            )
        elif b - a > abs(x):
            out.append(
                f"The interval of '{name}' ({a:.4g} to {b:.4g}) is wider than its value "
                f"({x:.4g}): it is poorly determined by these data. {_MORE_DATA}"
            )
    return out


def bound_warnings(values, lower, upper, names, rel=1e-3):
    """
    Warnings for parameters that ended at (or beyond) a bound of the search.

    Parameters
    ----------
    values : array_like
        Estimates. [parameter units]
    lower, upper : array_like or float
        Bounds of the search, broadcast to ``values``; -inf / inf for none.
        [parameter units]
    names : sequence of str
        Parameter names.
    rel : float, default 1e-3
        How close counts as "at": within ``rel * (upper - lower)`` when both bounds are
        finite, else within ``rel * max(|bound|, |value|)``.

    Returns
    -------
    list of str
        One sentence per parameter at a bound. Such an estimate is not a free optimum: its
        interval is not meaningful, and the model or the bound is probably wrong.
    """
    v = np.asarray(values, dtype=float).ravel()
    lo = np.broadcast_to(np.asarray(lower, dtype=float), v.shape)
    hi = np.broadcast_to(np.asarray(upper, dtype=float), v.shape)
    names = list(names)
    if len(names) != v.size:
        raise ValueError(f"{v.size} values for {len(names)} names")
    out = []
    for name, x, a, b in zip(names, v, lo, hi):
        span = b - a if np.isfinite(a) and np.isfinite(b) else math.nan
        for bound, side in ((a, "lower"), (b, "upper")):
            if not np.isfinite(bound):
                continue
            tol = rel * span if np.isfinite(span) else rel * max(abs(bound), abs(x))
            beyond = x < bound if side == "lower" else x > bound
            if beyond or abs(x - bound) <= tol:
                out.append(
                    f"'{name}' = {x:.4g} ended at its {side} bound ({bound:.4g}): the fit wanted "
                    "to go further, so its interval means little. Check that the bound is "
                    f"physical; if it is, the model does not suit the data. {_MORE_DATA}"
                )
                break
    return out


# Below this 5-95 % range of the indoor temperature's hourly means the log shows no free
# response (our choice, measured: a thermostat held at one setpoint all month gave 0.11-0.13 K,
# every log with a night setback or free-floating hours at least 0.86 K; docs/calibration.md).
MIN_INDOOR_EXCURSION_K = 0.5


def indoor_excursion_k(indoor_c, index):
    """
    How far the indoor temperature moves from hour to hour: the 5-95 % range of its hourly means.

    A thermostat that holds one setpoint day and night leaves the hourly means all but
    constant; the heating then follows the load, and the slow modes of the home never show
    in the temperature, so its time constants are not determined by the log.

    Parameters
    ----------
    indoor_c : array_like
        Indoor temperature; NaN where not observed. [°C]
    index : pandas.DatetimeIndex
        Stamps of the readings.

    Returns
    -------
    float
        The range [K]; NaN when no hour has a reading.
    """
    hourly = pd.Series(np.asarray(indoor_c, dtype=float), index=index).resample("1h").mean().dropna()
    if hourly.empty:
        return math.nan
    low, high = np.percentile(hourly.to_numpy(), [5.0, 95.0])
    return float(high - low)


def excursion_warnings(excursion_k, threshold_k=MIN_INDOOR_EXCURSION_K):
    """
    A warning when the indoor temperature hardly moves from hour to hour.

    Parameters
    ----------
    excursion_k : float
        :func:`indoor_excursion_k` of the log. [K]
    threshold_k : float, default :data:`MIN_INDOOR_EXCURSION_K`
        Range below which the time constants are reported as not determined. [K]

    Returns
    -------
    list of str
        One sentence, or empty.
    """
    if not np.isfinite(excursion_k) or excursion_k >= threshold_k:
        return []
    return [
        f"The indoor temperature hardly moves from hour to hour (hourly means within {excursion_k:.2f} K, "
        f"5-95 %; under {threshold_k:g} K): the log holds no night setback or free-floating period, so the "
        "time constants are not determined by these data, whatever their intervals say, and UA rests on "
        "the heating's balance with the weather alone. Log a week or more with night setbacks of 2 K or "
        "more, or with periods of the heating off."
    ]
