r"""
The monthly report of one home: data quality, calibration, fit, energy and its drift, cautions.

A *home file* (TOML, format in docs/formats.md) names the log and its column map, the weather
file or the site, and optionally the construction, the thermostat program, the setback
strategies and the floor area. :func:`build_report` calibrates the model (or takes a given
result), and gathers for one calendar month:

* the data-quality verdict of the log;
* the calibrated parameters with 95 % intervals, and the ASHRAE Guideline 14 metrics of the
  heating energy against their thresholds (hourly: CV(RMSE) 30 %, NMBE ±10 %; monthly: 15 %,
  ±5 %);
* the model comparison, the measured and modelled indoor temperature, the residual
  autocorrelation and the Ljung-Box test;
* the energy signature (daily heating energy against daily mean outdoor temperature) with
  the calibrated model's line;
* the month's metered heating energy against the model's expectation for the month's
  weather, and the same for every month of the log, so that a retrofit or a fault shows up
  as drift (the ratio of metered to expected energy, and the UA of each month's signature);
* the setback comparison, the Biot summary and the cautions.

:func:`write_report` writes one self-contained HTML file (figures embedded as base64 PNG, CSS
inline, no outside resources), the tables as CSV beside it and, on request, a PDF.

The model's expectation is the heat an ideal heater must deliver for the calibrated network
to follow the measured indoor temperature (or the logged setpoint) under the logged weather:
heat a real heating system cannot "see" in advance, but the yardstick of the Guideline 14
energy comparison.

References
----------
.. [1] ASHRAE Guideline 14-2014, Measurement of Energy, Demand, and Water Savings, Atlanta:
   ASHRAE, 2014 (calibration criteria; clause from memory).
.. [2] G. M. Ljung and G. E. P. Box, "On a measure of lack of fit in time series models,"
   Biometrika, vol. 65, no. 2, pp. 297-303, 1978.
.. [3] World Health Organization, WHO Housing and Health Guidelines, Geneva, 2018, ch. 3.
.. [4] ISO 13790:2008, clause 12 (steady-state balance behind the energy signature); from
   memory.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import math
import os
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.errors import InputError
from thermorc.network import PRESETS

__all__ = [
    "HomeFile",
    "MonthlyReport",
    "read_home",
    "parse_home",
    "parse_month",
    "model_weather",
    "expected_heating_w",
    "daily_energy",
    "signature_ua",
    "monthly_energy_table",
    "build_report",
    "render_html",
    "render_pdf",
    "write_report",
    "G14_THRESHOLDS",
    "REPORT_CAUTIONS",
]

#: ASHRAE Guideline 14-2014 calibration criteria [%]: CV(RMSE) limit and |NMBE| limit
#: (see docs/methods.md and docs/validation.md).
G14_THRESHOLDS = {"hourly": {"cv_rmse_pct": 30.0, "nmbe_pct": 10.0}, "monthly": {"cv_rmse_pct": 15.0, "nmbe_pct": 5.0}}

#: The cautions every report carries (rule: results that can hurt people defer to codes).
REPORT_CAUTIONS = (
    "Heating figures in this report are estimates from a calibrated model. They are no substitute for a "
    "design load calculation by a licensed professional under local codes (for example ACCA Manual J in "
    "the USA) when a heating system is sized or replaced.",
    "Keep occupied rooms at 18 degC or warmer in the cold season (WHO Housing and Health Guidelines, 2018); "
    "older, very young and sick people need more warmth. A setback that saves energy must not leave "
    "occupied rooms colder than that.",
    "Keep the whole home above about 10 degC, also while away: below that, water pipes in outside walls, "
    "crawl spaces and unheated rooms are at risk of freezing (common practice).",
    "A heat pump may bring on auxiliary resistance heat while it recovers from a setback, which raises the "
    "peak and can cancel the savings; check the controls (slow recovery, outdoor lockout).",
)

_HOME_KEYS = {"name", "floor_area_m2", "log", "weather", "site", "construction", "schedule", "strategies", "model",
              "description", "window_areas", "ground_c", "ground_share"}
_LOG_KEYS = {"file", "column_map", "tz", "interval"}
_SITE_KEYS = {"name", "latitude", "longitude", "altitude_m", "tz", "file"}
_MODEL_KEYS = {"preset", "gains", "gains_hours", "step_min", "result"}
_PRESETS = (*PRESETS, "auto")

# Colours of our own: deep teal, ember, slate, sand, moss.
TEAL, EMBER, SLATE, SAND, MOSS = "#1d6a72", "#d2603a", "#3f4b5c", "#e3b868", "#6b8e4e"


# -- the home file -------------------------------------------------------------------------
@dataclass
class HomeFile:
    """
    What a home file names; paths are resolved against the home file's folder.

    Attributes
    ----------
    path : str
        The home file.
    name : str
        Label of the home.
    log : str
        The log file.
    column_map : str or dict or None
        Column map file, or an inline map (docs/data-formats.md).
    tz : str or None
        IANA zone of naive log times (and the clock of the report).
    interval : str or None
        ``'start'`` or ``'end'``: the interval label of the log's powers.
    weather : str or None
        Weather file (TMY3, EPW, CSV).
    site : dict
        ``latitude``, ``longitude`` [deg], ``altitude_m`` [m], ``tz``, ``name`` where given.
    construction, schedule, strategies : str or None
        Construction TOML, thermostat program TOML, setback strategies TOML.
    floor_area_m2 : float or None
        Heated floor area. [m²]
    window_areas : str or dict or None
        Window area per façade, ``"S=8,E=3,W=3,N=4"`` or a table [m²]: weights the façades of
        the solar input (:func:`thermorc.chain.parse_window_areas`).
    ground_c, ground_share : float or None
        Ground temperature [°C] and the share of the heat loss that goes to it, as
        ``calibrate --ground-c/--ground-share`` (the share may come from the construction).
    preset : str
        ``'1R1C'``, ``'2R2C'``, ``'3R2C'``, ``'4R3C'`` or ``'auto'``.
    gains : str or dict
        ``'constant'``, ``'day_night'`` or ``'four_period'``, or the schedule with the
        household's own hours (``[model] gains_hours``, :func:`thermorc.result.gains_schedule`).
    step_s : float or None
        Model step. [s]
    result : str or None
        A RESULT.json to use instead of calibrating.
    """

    path: str
    name: str
    log: str
    column_map: object = None
    tz: str | None = None
    interval: str | None = None
    weather: str | None = None
    site: dict = field(default_factory=dict)
    construction: str | None = None
    schedule: str | None = None
    strategies: str | None = None
    floor_area_m2: float | None = None
    window_areas: object = None
    ground_c: float | None = None
    ground_share: float | None = None
    preset: str = "auto"
    gains: str | dict = "constant"
    step_s: float | None = None
    result: str | None = None


def read_home(path):
    """
    Read a home file.

    Parameters
    ----------
    path : str or os.PathLike
        The home file (TOML; format in docs/formats.md).

    Returns
    -------
    HomeFile

    Raises
    ------
    InputError
        Unreadable file, TOML syntax error, an unknown or wrong key, or a named file that
        does not exist (naming the key).
    """
    from thermorc.schedule import read_toml

    return parse_home(read_toml(path), path=os.fspath(path))


def _unknown(table, allowed, path, prefix):
    extra = sorted(k for k in table if k not in allowed)
    if extra:
        raise InputError(f"unknown key (expected one of {', '.join(sorted(allowed))})", path=path,
                         column=prefix + extra[0])


def _text(value, path, key, required=False):
    if value is None:
        if required:
            raise InputError("missing (expected text)", path=path, column=key)
        return None
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{value!r} is not text (expected a non-empty string)", path=path, column=key)
    return value.strip()


def _file(value, path, key, required=False):
    name = _text(value, path, key, required)
    if name is None:
        return None
    full = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(path)), os.path.expanduser(name)))
    if not os.path.isfile(full):
        raise InputError(f"{name!r}: no such file (paths are relative to the home file's folder)", path=path,
                         column=key)
    return full


def _number(value, path, key, low, high, unit):
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (low <= value <= high):
        raise InputError(f"{value!r} is out of range (expected {unit} from {low:g} to {high:g})", path=path,
                         column=key)
    return float(value)


def _site(raw, path):
    """Inline ``[site]`` table, or ``site = "site.toml"`` naming a file of the same keys."""
    from thermorc.schedule import read_toml

    where = path
    if isinstance(raw, str):
        where = _file(raw, path, "site")
        raw = read_toml(where)
    if not isinstance(raw, dict):
        raise InputError("expected a table or a file name", path=path, column="site")
    _unknown(raw, _SITE_KEYS, where, "" if where != path else "site.")
    prefix = "" if where != path else "site."
    site = {}
    lat = _number(raw.get("latitude"), where, prefix + "latitude", -90.0, 90.0, "degrees")
    lon = _number(raw.get("longitude"), where, prefix + "longitude", -180.0, 180.0, "degrees")
    if (lat is None) != (lon is None):
        raise InputError("give both latitude and longitude", path=where, column=prefix + ("longitude" if lon is None else "latitude"))
    if lat is not None:
        site.update(latitude=lat, longitude=lon)
    alt = _number(raw.get("altitude_m"), where, prefix + "altitude_m", -500.0, 9000.0, "m")
    if alt is not None:
        site["altitude_m"] = alt
    for key in ("tz", "name"):
        value = _text(raw.get(key), where, prefix + key)
        if value is not None:
            site[key] = value
    return site


def parse_home(data, path):
    """
    Build a :class:`HomeFile` from parsed TOML.

    Parameters
    ----------
    data : dict
        Parsed home file.
    path : str
        The home file (for messages, and the folder that relative paths start from).

    Returns
    -------
    HomeFile
    """
    _unknown(data, _HOME_KEYS, path, "")
    log = data.get("log")
    if isinstance(log, str):
        log = {"file": log}
    if not isinstance(log, dict):
        raise InputError("missing (expected a [log] table with file = \"log.csv\")", path=path, column="log")
    _unknown(log, _LOG_KEYS, path, "log.")
    column_map = log.get("column_map")
    if isinstance(column_map, str):
        column_map = _file(column_map, path, "log.column_map")
    elif column_map is not None and not isinstance(column_map, dict):
        raise InputError("expected a file name or an inline table", path=path, column="log.column_map")
    interval = _text(log.get("interval"), path, "log.interval")
    if interval not in (None, "start", "end"):
        raise InputError(f"{interval!r} (expected 'start' or 'end')", path=path, column="log.interval")
    weather = data.get("weather")
    if isinstance(weather, dict):
        _unknown(weather, {"file"}, path, "weather.")
        weather = weather.get("file")
        weather_key = "weather.file"
    else:
        weather_key = "weather"
    site = _site(data["site"], path) if "site" in data else {}
    model = data.get("model", {})
    if not isinstance(model, dict):
        raise InputError("expected a [model] table", path=path, column="model")
    _unknown(model, _MODEL_KEYS, path, "model.")
    preset = str(model.get("preset", "auto"))
    preset = preset if preset == "auto" else preset.upper()
    if preset not in _PRESETS:
        raise InputError(f"{model.get('preset')!r} (expected one of {', '.join(_PRESETS)})", path=path,
                         column="model.preset")
    gains = str(model.get("gains", "constant")).replace("-", "_")
    if gains not in ("constant", "day_night", "four_period"):
        raise InputError(f"{model.get('gains')!r} (expected 'constant', 'day-night' or 'four-period')", path=path,
                         column="model.gains")
    if "gains_hours" in model:
        from thermorc.result import gains_schedule, parse_gains_hours

        try:
            if not isinstance(model["gains_hours"], list):
                raise InputError("expected a list of start hours, e.g. [9, 12, 20, 2]")
            gains = gains_schedule(gains, parse_gains_hours(model["gains_hours"], "gains_hours"), where="gains_hours")
        except InputError as exc:
            raise InputError(exc.message, path=path, column="model.gains_hours") from None
    step_min = _number(model.get("step_min"), path, "model.step_min", 1.0, 60.0, "minutes")
    tz = _text(log.get("tz"), path, "log.tz") or site.get("tz")
    if tz is not None:
        from thermorc.read import zone

        try:
            zone(tz, path)
        except InputError as exc:
            raise exc.located(column="log.tz" if log.get("tz") else "site.tz") from None
    window_areas = data.get("window_areas")
    if window_areas is not None:
        from thermorc.chain import parse_window_areas

        try:
            parse_window_areas(window_areas, name="window_areas")
        except InputError as exc:
            raise exc.located(path=path, column="window_areas") from None
    ground_c, ground_share = _ground_keys(data, path)
    home = HomeFile(
        path=path,
        name=_text(data.get("name"), path, "name") or os.path.splitext(os.path.basename(path))[0],
        log=_file(log.get("file"), path, "log.file", required=True),
        column_map=column_map,
        tz=tz,
        interval=interval,
        weather=_file(weather, path, weather_key),
        site=site,
        construction=_file(data.get("construction"), path, "construction"),
        schedule=_file(data.get("schedule"), path, "schedule"),
        strategies=_file(data.get("strategies"), path, "strategies"),
        floor_area_m2=_number(data.get("floor_area_m2"), path, "floor_area_m2", 1.0, 1e5, "m2"),
        window_areas=window_areas,
        ground_c=ground_c,
        ground_share=ground_share,
        preset=preset,
        gains=gains,
        step_s=None if step_min is None else step_min * 60.0,
        result=_file(model.get("result"), path, "model.result"),
    )
    if home.weather is None and "latitude" not in site:
        # Without either, solar gains cannot be modelled and the log must carry outdoor_c.
        pass
    return home


def parse_month(text):
    """
    Read ``YYYY-MM``.

    Parameters
    ----------
    text : str
        Year and month, e.g. ``"2023-02"``.

    Returns
    -------
    tuple of int
        ``(year, month)``.
    """
    match = re.fullmatch(r"\s*(\d{4})-(\d{2})\s*", str(text))
    if not match or not 1 <= int(match.group(2)) <= 12:
        raise InputError(f"--month is {text!r} (expected YYYY-MM, e.g. 2023-02)")
    return int(match.group(1)), int(match.group(2))


# -- computations --------------------------------------------------------------------------
def model_weather(result, weather, site=None):
    """
    A weather frame with the irradiance the calibrated aperture multiplies.

    A calibration on a log with a known site uses the irradiance on vertical walls
    (:data:`thermorc.chain.SOLAR_COLUMN`); a weather file holds global horizontal irradiance,
    so the walls' is computed here the same way (pvlib transposition,
    :func:`thermorc.chain.vertical_irradiance`).

    Parameters
    ----------
    result : CalibrationResult
    weather : pandas.DataFrame
        From :func:`thermorc.read.read_weather`.
    site : dict, optional
        ``latitude``, ``longitude`` [deg]; default: the result's site.

    Returns
    -------
    pandas.DataFrame
        ``weather`` with the result's irradiance column [W m⁻²] added when it needs it.
    """
    if result.solar_input in weather.columns:
        return weather
    from thermorc import chain

    site = {**(result.site or {}), **(site or {})}
    if result.solar_input == chain.SOLAR_COLUMN and "latitude" in site and "ghi_w_m2" in weather.columns:
        out = weather.copy()
        out[chain.SOLAR_COLUMN] = chain.vertical_irradiance(out, site, out, weights=result.solar_weights or None)
        return out
    return weather


def _model_frame(result, frame):
    """The calibrated network's inputs over a log frame; holes in the weather bridged."""
    inputs = pd.DataFrame(index=frame.index)
    inputs["outdoor_c"] = frame["outdoor_c"].interpolate(limit_direction="both")
    solar = frame[result.solar_input] if result.solar_input in frame.columns else pd.Series(0.0, index=frame.index)
    inputs["solar_w_m2"] = solar.fillna(0.0)
    logged = frame["internal_gains_w"].fillna(0.0) if "internal_gains_w" in frame.columns else 0.0
    inputs["internal_w"] = result.internal_gains_w(frame.index) + logged
    for name, series in result.boundary_inputs(frame.index).items():
        inputs[name] = series
    return inputs


def expected_heating_w(result, frame, follow="indoor"):
    """
    Heat the calibrated model needs under a log's weather, by an ideal heater.

    Parameters
    ----------
    result : CalibrationResult
        The calibrated model.
    frame : pandas.DataFrame
        Log on a uniform grid: ``outdoor_c`` [°C], the result's irradiance column [W m⁻²],
        ``indoor_c`` and/or ``setpoint_c`` [°C], optionally ``internal_gains_w`` [W].
    follow : {'indoor', 'setpoint'} or array_like
        What the indoor node must follow: the measured indoor temperature, the logged
        setpoint, or a setpoint series of the frame's length. [°C]

    Returns
    -------
    pandas.Series
        Mean heating power over each interval (heating only, no cooling). [W]

    Notes
    -----
    Each interval's power is the constant heat that brings the indoor node to the target at
    the interval's end (:func:`thermorc.simulate.hold_setpoint`, exact for a zero-order hold);
    when the home is warmer than the target the heater is off and the model floats.
    """
    from thermorc.simulate import hold_setpoint

    if isinstance(follow, str):
        column = {"indoor": "indoor_c", "setpoint": "setpoint_c"}.get(follow)
        if column is None or column not in frame.columns:
            raise InputError(f"cannot follow {follow!r}: the log has no such column (expected indoor or setpoint)")
        target = frame[column].interpolate(limit_direction="both").to_numpy()
    else:
        target = np.asarray(follow, dtype=float)
    res = hold_setpoint(result.network(), _model_frame(result, frame), target)
    return pd.Series(res.inputs["heating_w"].to_numpy(), index=frame.index, name="heating_w")


def _local(index):
    return index.tz_localize(None) if index.tz is not None else index


def daily_energy(frame, step_s, observed=None, min_coverage=0.9):
    """
    Daily heating energy and mean temperatures, for the energy signature.

    Parameters
    ----------
    frame : pandas.DataFrame
        ``heating_w`` [W], ``outdoor_c`` and ``indoor_c`` [°C] on a uniform grid.
    step_s : float
        Grid step. [s]
    observed : array_like of bool, optional
        Rows that count (default: all rows with heating, outdoor and indoor readings).
    min_coverage : float
        Days with a smaller observed fraction are dropped.

    Returns
    -------
    pandas.DataFrame
        Index: local date; ``heating_kwh`` (scaled up to the whole day by the coverage),
        ``outdoor_mean_c``, ``indoor_mean_c``, ``coverage``.
    """
    ok = frame[["heating_w", "outdoor_c", "indoor_c"]].notna().all(axis=1).to_numpy().copy()
    if observed is not None:
        ok &= np.asarray(observed, dtype=bool)
    per_day = 86400.0 / step_s
    day = pd.Index(_local(frame.index).normalize(), name="date")
    sub = frame.loc[ok, ["heating_w", "outdoor_c", "indoor_c"]]
    groups = sub.groupby(day[ok])
    out = pd.DataFrame({
        "heating_kwh": groups["heating_w"].mean() * 24.0 / 1000.0,
        "outdoor_mean_c": groups["outdoor_c"].mean(),
        "indoor_mean_c": groups["indoor_c"].mean(),
        "coverage": groups.size() / per_day,
    })
    return out[out["coverage"] >= min_coverage]


def signature_ua(daily, min_days=7):
    r"""
    Heat loss coefficient from an energy signature: daily energy against (indoor - outdoor).

    Parameters
    ----------
    daily : pandas.DataFrame
        From :func:`daily_energy`.
    min_days : int
        Fewer days give NaN.

    Returns
    -------
    dict
        ``ua_w_per_k`` (slope of heating power against the temperature difference),
        ``intercept_w`` (minus the mean free gains), ``r2`` and ``n_days``.

    Notes
    -----
    Ordinary least squares of :math:`\bar Q_d = UA\,(\bar T_{i,d} - \bar T_{o,d}) - G` on
    daily means, the steady-state balance of ISO 13790:2008 clause 12 written per day
    (from memory); heat stored in the structure averages out over days only roughly, so
    this is a cross-check of the dynamic calibration, not a replacement.
    """
    heat = daily["heating_kwh"].to_numpy() * 1000.0 / 24.0
    dt = (daily["indoor_mean_c"] - daily["outdoor_mean_c"]).to_numpy()
    n = int(np.isfinite(heat).sum())
    if n < min_days or np.ptp(dt) < 1.0:
        return {"ua_w_per_k": math.nan, "intercept_w": math.nan, "r2": math.nan, "n_days": n}
    design = np.column_stack([dt, np.ones_like(dt)])
    coef, *_ = np.linalg.lstsq(design, heat, rcond=None)
    fitted = design @ coef
    ss_tot = float(np.sum((heat - heat.mean()) ** 2))
    r2 = 1.0 - float(np.sum((heat - fitted) ** 2)) / ss_tot if ss_tot > 0 else math.nan
    return {"ua_w_per_k": float(coef[0]), "intercept_w": float(coef[1]), "r2": r2, "n_days": n}


def monthly_energy_table(frame, step_s, expected, observed=None):
    """
    Metered and expected heating energy per calendar month of the log.

    Parameters
    ----------
    frame : pandas.DataFrame
        ``heating_w`` [W], ``outdoor_c``, ``indoor_c`` [°C] on a uniform grid.
    step_s : float
        Grid step. [s]
    expected : dict
        Label -> :class:`pandas.Series` of expected heating power on the same index [W]
        (see :func:`expected_heating_w`).
    observed : array_like of bool, optional
        Rows that count in every sum (default: rows with a metered heating value).

    Returns
    -------
    pandas.DataFrame
        Index ``month`` (``YYYY-MM``); ``days`` observed, ``outdoor_mean_c``,
        ``indoor_mean_c``, ``heating_degree_days_18_k_day`` (base 18 degC on daily means),
        ``metered_kwh``, ``expected_<label>_kwh``, ``ratio_<label>`` (metered / expected),
        ``signature_ua_w_per_k`` and ``signature_days``.
    """
    ok = frame["heating_w"].notna().to_numpy().copy()
    if observed is not None:
        ok &= np.asarray(observed, dtype=bool)
    local = _local(frame.index)
    key = np.asarray(local.year * 100 + local.month)
    daily = daily_energy(frame, step_s, observed=ok)
    dkey = np.asarray(pd.DatetimeIndex(daily.index).year * 100 + pd.DatetimeIndex(daily.index).month)
    rows = {}
    for k in np.unique(key):
        rows_k = (key == k) & ok
        month = f"{k // 100:04d}-{k % 100:02d}"
        sel = frame.loc[rows_k]
        d = daily[dkey == k]
        row = {
            "days": float(rows_k.sum() * step_s / 86400.0),
            "outdoor_mean_c": float(sel["outdoor_c"].mean()),
            "indoor_mean_c": float(sel["indoor_c"].mean()),
            "heating_degree_days_18_k_day": float(np.clip(18.0 - d["outdoor_mean_c"], 0, None).sum()),
            "metered_kwh": float(sel["heating_w"].sum() * step_s / 3.6e6),
        }
        for label, series in expected.items():
            e = float(series.to_numpy()[rows_k].sum() * step_s / 3.6e6)
            row[f"expected_{label}_kwh"] = e
            row[f"ratio_{label}"] = row["metered_kwh"] / e if e > 0 else math.nan
        sig = signature_ua(d)
        row["signature_ua_w_per_k"] = sig["ua_w_per_k"]
        row["signature_days"] = sig["n_days"]
        rows[month] = row
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "month"
    return table


# -- the report ----------------------------------------------------------------------------
@dataclass
class MonthlyReport:
    """
    Everything a monthly report shows, before it is written.

    Attributes
    ----------
    home : HomeFile
    month : str
        ``YYYY-MM``.
    result : CalibrationResult
    facts : dict
        Key figures (JSON-ready).
    tables : dict
        Name -> :class:`pandas.DataFrame` (each also written as CSV).
    figures : dict
        Name -> (caption, :class:`matplotlib.figure.Figure`).
    sections : list
        ``(title, html)`` pairs in display order.
    cautions : list of str
    notes : list of str
    """

    home: HomeFile
    month: str
    result: object
    facts: dict = field(default_factory=dict)
    tables: dict = field(default_factory=dict)
    figures: dict = field(default_factory=dict)
    sections: list = field(default_factory=list)
    cautions: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def __repr__(self):
        return (f"MonthlyReport(home={self.home.name!r}, month={self.month}, tables={list(self.tables)}, "
                f"figures={list(self.figures)})")


def _figure(width_in=9.0, height_in=3.6, rows=1, sharex=False, height_ratios=None):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), dpi=110, layout="constrained")
    FigureCanvasAgg(fig)
    gridspec = {"height_ratios": height_ratios} if height_ratios else None
    axes = fig.subplots(rows, 1, sharex=sharex, gridspec_kw=gridspec, squeeze=False)[:, 0]
    for ax in axes:
        ax.grid(True, color="#d9dde3", linewidth=0.6)
        ax.set_axisbelow(True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
    return fig, axes


def _unit_label(name):
    """Display label, unit and scale of a parameter or derived quantity."""
    special = {
        "heat_loss_coefficient_w_per_k": ("heat loss coefficient UA", "W/K", 1.0),
        "capacitance_j_per_k": ("total heat capacity", "MJ/K", 1e-6),
        "solar_to_envelope_share": ("share of solar gain on the envelope node", "-", 1.0),
        "solar_to_interior_share": ("share of solar gain on the interior-mass node", "-", 1.0),
        "solar_aperture_m2": ("solar aperture", "m2", 1.0),
    }
    if name in special:
        return special[name]
    m = re.fullmatch(r"time_constant_(\d+)_h", name)
    if m:
        return (f"time constant {m.group(1)}", "h", 1.0)
    for suffix, unit, scale in (("_k_per_w", "K/W", 1.0), ("_j_per_k", "MJ/K", 1e-6), ("_m2", "m2", 1.0),
                                ("_w", "W", 1.0), ("_h", "h", 1.0), ("_s", "s", 1.0)):
        if name.endswith(suffix):
            return (name[: -len(suffix)].replace("_", " "), unit, scale)
    return (name.replace("_", " "), "-", 1.0)


def _parameter_table(result):
    names = ["heat_loss_coefficient_w_per_k", "capacitance_j_per_k"]
    names += [f"time_constant_{i + 1}_h" for i in range(len(result.time_constants_h))]
    names += list(result.parameters)
    values = {
        "heat_loss_coefficient_w_per_k": result.heat_loss_coefficient_w_per_k,
        "capacitance_j_per_k": result.capacitance_j_per_k,
        **{f"time_constant_{i + 1}_h": t for i, t in enumerate(result.time_constants_h)},
        **result.parameters,
    }
    rows = []
    hours = result.gains_period_hours()
    for name in names:
        label, unit, scale = _unit_label(name)
        if name in hours:
            label = f"{label} ({hours[name]})"
        low, high = (result.intervals.get(name) or [math.nan, math.nan])[:2]
        low = math.nan if low is None else float(low)
        high = math.nan if high is None else float(high)
        rows.append({"quantity": label, "unit": unit, "value": float(values[name]) * scale,
                     "low_95": low * scale, "high_95": high * scale, "key": name})
    return pd.DataFrame(rows).set_index("quantity")


def _g14_table(result, step_s):
    energy = result.extras.get("energy_fit") or {}
    p = energy.get("n_params", result.fit.get("n_params"))
    rows = []
    for res in ("hourly", "monthly"):
        block = energy.get(res) or {}
        limits = G14_THRESHOLDS[res]
        cv, nmbe, n = block.get("cv_rmse_pct"), block.get("nmbe_pct"), block.get("n")
        computed = cv is not None and nmbe is not None and math.isfinite(cv) and math.isfinite(nmbe)
        if res == "hourly":
            applies = ("yes: the log is hourly or finer, so the hourly criteria apply" if step_s <= 3600
                       else "no: the log is coarser than hourly")
        else:
            applies = ("yes: enough calendar months for the monthly criteria" if computed else
                       f"not yet: {n or 0} month(s) of data, more than p = {p} are needed")
        meets = None if not computed else bool(abs(nmbe) <= limits["nmbe_pct"] and cv <= limits["cv_rmse_pct"])
        rows.append({
            "resolution": res,
            "periods": n,
            "cv_rmse_pct": cv if computed else math.nan,
            "cv_rmse_limit_pct": limits["cv_rmse_pct"],
            "nmbe_pct": nmbe if computed else math.nan,
            "nmbe_limit_pct": limits["nmbe_pct"],
            "meets": "n/a" if meets is None else ("yes" if meets else "no"),
            "applies": applies,
        })
    return pd.DataFrame(rows).set_index("resolution")


def _share_html(result):
    share = result.extras.get("heating_share")
    if share is None or not math.isfinite(float(share)):
        return ""
    from thermorc.estimate import MIN_HEATING_SHARE

    text = (f"The metered heating supplied {100 * float(share):.0f} % of the heat entering the home in the "
            "fitted period (the rest: sun and unlogged gains, by the fit).")
    if float(share) < MIN_HEATING_SHARE:
        text += (f" Below {100 * MIN_HEATING_SHARE:.0f} %, the record does not pin down the heat loss coefficient: "
                 "treat UA as unknown and calibrate again on colder weeks.")
    return _p(text)


def _validation_html(validation):
    """The held-out days of ``calibrate --test-days``, when the result has them."""
    if not validation:
        return ""

    def fmt(key, unit, digits=2):
        value = validation.get(key)
        return "–" if value is None or not math.isfinite(float(value)) else f"{float(value):.{digits}f} {unit}"
    text = (f"Days kept back from the fit ({str(validation.get('start', ''))[:10]} to "
            f"{str(validation.get('end', ''))[:10]}), predicted open loop: indoor temperature RMSE "
            f"{fmt('rmse_k', 'K')}, bias {fmt('bias_k', 'K')}, largest error {fmt('max_abs_error_k', 'K')}; "
            f"hourly heating energy CV(RMSE) {fmt('cv_rmse_pct', '%', 1)}, NMBE {fmt('nmbe_pct', '%', 1)}.")
    # Its cautions are among the result's warnings, which the report lists already.
    return "<h3>Validation on days the fit did not see</h3>" + _p(text)


def _comparison_table(result):
    comp = result.extras.get("model_comparison") or {}
    rows = []
    for r in comp.get("rows", []):
        if "skipped" in r:
            rows.append({"model": r["model"], "note": r["skipped"]})
            continue
        taus = r.get("time_constants_h") or []
        rows.append({
            "model": r["model"], "parameters": r.get("n_params"), "train_rmse_k": r.get("train_rmse_k"),
            "holdout_rmse_k": r.get("holdout_rmse_k"), "bic": r.get("bic"),
            "lr_p_value_vs_simpler": r.get("lr_p_value", math.nan),
            "ua_w_per_k": r.get("heat_loss_coefficient_w_per_k"),
            "slowest_time_constant_h": float(taus[0]) if taus else math.nan,
            "chosen": "yes" if r.get("chosen") else "",
        })
    if not rows:
        return None, comp
    return pd.DataFrame(rows).set_index("model"), comp


def _ljung_box_table(result, residuals, step_s):
    from thermorc import diagnose

    lb = (result.extras.get("diagnostics") or {}).get("ljung_box") or {}
    if not lb:
        r = residuals.to_numpy()
        try:
            lb = diagnose.ljung_box(r[np.isfinite(r)])
        except (ValueError, ZeroDivisionError):
            lb = {}
    rows = []
    for lag, v in sorted(lb.items(), key=lambda kv: int(kv[0])):
        rows.append({"lag_steps": int(lag), "lag_h": int(lag) * step_s / 3600.0, "statistic": v.get("statistic"),
                     "df": v.get("df"), "p_value": v.get("p_value")})
    return pd.DataFrame(rows).set_index("lag_steps") if rows else None


def _ground_keys(data, path):
    """``ground_c`` and ``ground_share`` of a home file (:func:`thermorc.estimate.check_ground_keys`)."""
    from thermorc.estimate import check_ground_keys

    ground = {}
    for key in ("ground_c", "ground_share"):
        raw = data.get(key)
        if raw is None:
            continue
        if isinstance(raw, bool) or not isinstance(raw, (int, float)):
            raise InputError(f"{key} is {raw!r} (expected a number)", path=path, column=key)
        ground[key] = raw
    return check_ground_keys(ground, data.get("construction") is not None,
                             lambda key: {"path": path, "column": key})


def _calibrate(home, progress):
    from thermorc.chain import calibrate_files

    progress("calibrating the model")
    return calibrate_files(
        home.log, column_map=home.column_map, tz=home.tz, interval=home.interval, weather=home.weather,
        site=home.site if "latitude" in home.site else None, construction=home.construction,
        model=home.preset, gains=home.gains, step_s=home.step_s, window_areas=home.window_areas,
        ground_c=home.ground_c, ground_share=home.ground_share,
    )


def build_report(home, month, result=None, progress=None):
    """
    Gather everything the monthly report of one home shows.

    Parameters
    ----------
    home : HomeFile or str or os.PathLike
        The home, or its home file.
    month : str
        ``YYYY-MM``; must overlap the log.
    result : CalibrationResult, optional
        A calibration to report on; default: the home file's ``model.result``, else a new
        calibration of the whole log.
    progress : callable, optional
        Receives one short line per stage.

    Returns
    -------
    MonthlyReport

    Raises
    ------
    InputError
        A bad home file or input file, or a month outside the log.
    """
    from thermorc import diagnose, quality
    from thermorc.chain import prepare_log
    from thermorc.estimate import predict
    from thermorc.result import CalibrationResult

    progress = progress or (lambda line: None)
    if not isinstance(home, HomeFile):
        home = read_home(home)
    year, mon = parse_month(month)
    label = f"{year:04d}-{mon:02d}"
    progress("reading the log")
    site = home.site if "latitude" in home.site else None
    if result is None and home.result is not None:
        result = CalibrationResult.from_json(home.result)
    # The log's solar input with the façade weights the model was (or will be) calibrated with.
    if result is not None:
        weights = result.solar_weights or None
    elif home.window_areas is not None:
        from thermorc.chain import parse_window_areas

        weights = parse_window_areas(home.window_areas)
    elif home.construction is not None:
        from thermorc.construction import read_construction, window_facade_weights

        weights = window_facade_weights(read_construction(home.construction))
    else:
        weights = None
    prepared = prepare_log(home.log, column_map=home.column_map, tz=home.tz, interval=home.interval,
                           weather_path=home.weather, site=site, step_s=home.step_s, solar_weights=weights)
    frame = prepared.data
    step_s = float(prepared.aligned.step_s) if hasattr(prepared.aligned, "step_s") else float(
        np.median(np.diff(frame.index.asi8)) / 1e9)
    local = _local(frame.index)
    in_month = np.asarray((local.year == year) & (local.month == mon))
    if not in_month.any():
        raise InputError(
            f"month {label} is not in the log (it covers {local[0]:%Y-%m-%d} to {local[-1]:%Y-%m-%d})",
            path=home.log)
    observed = ~np.asarray(prepared.aligned.gap_mask, dtype=bool)
    report_quality = quality.inspect_log(prepared.aligned, has_weather=home.weather is not None)
    if result is None:
        result = _calibrate(home, progress)
    rep = MonthlyReport(home=home, month=label, result=result)
    progress("comparing model and log")
    residuals = getattr(result, "_residuals", None)
    modelled = getattr(result, "_modelled", None)
    if modelled is None or not modelled.index.equals(frame.index):
        modelled = predict(result, frame)["indoor_c"]
        residuals = (frame["indoor_c"] - modelled).where(pd.Series(observed, index=frame.index))
    expected = {"indoor": expected_heating_w(result, frame, "indoor")}
    follow_note = "the measured indoor temperature"
    if "setpoint_c" in frame.columns and frame["setpoint_c"].notna().mean() > 0.5:
        expected["setpoint"] = expected_heating_w(result, frame, "setpoint")
        follow_note += " and the logged setpoint"
    elif home.schedule is not None:
        from thermorc.schedule import read_schedule, setpoint_series

        sp = setpoint_series(read_schedule(home.schedule), frame.index)
        expected["setpoint"] = expected_heating_w(result, frame, sp.to_numpy())
        follow_note += " and the thermostat program of the home file"
    monthly = monthly_energy_table(frame, step_s, expected, observed=observed)
    daily = daily_energy(frame, step_s, observed=observed)
    this = monthly.loc[label]
    area = home.floor_area_m2
    construction = None
    if home.construction is not None:
        from thermorc.construction import read_construction

        construction = read_construction(home.construction)
        area = area or getattr(construction, "floor_area_m2", None)

    # Key figures.
    e_ind = float(this["expected_indoor_kwh"])
    facts = {
        "home": home.name,
        "month": label,
        "model": result.model,
        "heat_loss_coefficient_w_per_k": float(result.heat_loss_coefficient_w_per_k),
        "heat_loss_coefficient_95_w_per_k": list(result.intervals.get("heat_loss_coefficient_w_per_k") or []),
        "time_constants_h": [float(t) for t in result.time_constants_h],
        "metered_kwh": float(this["metered_kwh"]),
        "expected_kwh": e_ind,
        "metered_vs_expected_pct": 100.0 * (float(this["metered_kwh"]) / e_ind - 1.0) if e_ind > 0 else math.nan,
        "observed_days": float(this["days"]),
        "outdoor_mean_c": float(this["outdoor_mean_c"]),
        "indoor_min_c": float(frame.loc[in_month, "indoor_c"].min()),
        "indoor_mean_c": float(this["indoor_mean_c"]),
        "temperature_rmse_k": float(result.fit.get("rmse_k", math.nan)),
        "floor_area_m2": area,
        "metered_kwh_per_m2": float(this["metered_kwh"]) / area if area else None,
        "data_verdict": report_quality.verdict,
    }
    rep.facts = facts
    rep.notes = list(prepared.notes) + list((result.extras.get("data") or {}).get("notes", []))
    rep.notes = list(dict.fromkeys(rep.notes))

    # Tables.
    params = _parameter_table(result)
    g14 = _g14_table(result, step_s)
    comparison, comp_meta = _comparison_table(result)
    lb = _ljung_box_table(result, residuals, step_s)
    rep.tables["parameters"] = params
    rep.tables["guideline14"] = g14
    if comparison is not None:
        rep.tables["model_comparison"] = comparison
    if lb is not None:
        rep.tables["ljung_box"] = lb
    rep.tables["monthly_energy"] = monthly
    rep.tables["daily_energy"] = daily

    # Figures.
    progress("drawing figures")
    rep.figures["indoor"] = (f"Measured and modelled indoor temperature, {label}", _indoor_figure(
        frame[in_month], modelled[in_month], label))
    acf_fig, acf = _acf_figure(residuals, step_s, diagnose)
    rep.figures["residuals"] = ("Autocorrelation of the indoor-temperature residuals (measured minus modelled)",
                                acf_fig)
    sig = signature_ua(daily)
    rep.facts["signature_ua_w_per_k"] = sig["ua_w_per_k"]
    rep.figures["signature"] = ("Energy signature: daily heating energy against daily mean outdoor temperature",
                                _signature_figure(daily, result, label, frame, observed))
    rep.figures["months"] = ("Metered and expected heating energy by month", _months_figure(monthly, label))

    # Setback and construction.
    setback_html = ""
    if home.strategies is not None:
        progress("comparing setback strategies")
        setback_html = _setback_section(rep, home, result, label)
    biot_html = ""
    if construction is not None:
        progress("checking the construction")
        biot_html = _biot_section(rep, construction, result, step_s)

    # Cautions: the fixed ones, then what this month's data call for.
    from thermorc.forecast import PIPE_MIN_INDOOR_C, WHO_MIN_INDOOR_C

    rep.cautions = list(REPORT_CAUTIONS)
    low = facts["indoor_min_c"]
    if math.isfinite(low) and low < WHO_MIN_INDOOR_C:
        hours = float(((frame.loc[in_month, "indoor_c"] < WHO_MIN_INDOOR_C).sum()) * step_s / 3600.0)
        rep.cautions.append(f"This month the measured indoor temperature was below 18 degC for {hours:.1f} h "
                            f"(lowest {low:.1f} degC); check that no occupied room stayed that cold.")
    if math.isfinite(low) and low < PIPE_MIN_INDOOR_C:
        rep.cautions.append(f"This month the measured indoor temperature fell to {low:.1f} degC, below about "
                            "10 degC: check for pipes at risk of freezing.")
    rep.cautions += [f"Calibration warning: {w}" for w in result.warnings]

    rep.sections = _sections(rep, report_quality, in_month, frame, follow_note, comp_meta, setback_html, biot_html,
                             sig)
    return rep


# -- figures -------------------------------------------------------------------------------
def _indoor_figure(frame, modelled, label):
    fig, (ax, axh) = _figure(9.0, 5.2, rows=2, sharex=True, height_ratios=[2.2, 1.0])
    ax.plot(frame.index, frame["indoor_c"], color=SLATE, linewidth=0.9, label="measured indoor")
    ax.plot(modelled.index, modelled, color=EMBER, linewidth=1.1, label="modelled indoor (open loop)")
    if "setpoint_c" in frame.columns and frame["setpoint_c"].notna().any():
        ax.plot(frame.index, frame["setpoint_c"], color=SAND, linewidth=0.7, alpha=0.8, drawstyle="steps-post",
                label="logged setpoint", zorder=1)
    ax.set_ylabel("indoor temperature [°C]")
    ax.legend(loc="lower left", ncols=3, fontsize=8, frameon=False)
    ax.set_title(f"Indoor temperature, {label}", loc="left", fontsize=10)
    hourly = frame["heating_w"].resample("1h").mean() / 1000.0
    axh.fill_between(hourly.index, 0, hourly.to_numpy(), color=TEAL, alpha=0.55, step="post", linewidth=0,
                     label="metered heating, hourly mean")
    axh.set_ylabel("heating [kW]")
    axo = axh.twinx()
    axo.plot(frame.index, frame["outdoor_c"], color=MOSS, linewidth=0.8, label="outdoor")
    axo.set_ylabel("outdoor [°C]", color=MOSS)
    axo.spines["top"].set_visible(False)
    axh.set_xlabel(f"local time ({frame.index.tz})")
    lines = axh.get_legend_handles_labels()
    more = axo.get_legend_handles_labels()
    axh.legend(lines[0] + more[0], lines[1] + more[1], loc="upper right", fontsize=8, frameon=False, ncols=2)
    import matplotlib.dates as mdates

    axh.xaxis.set_major_formatter(mdates.DateFormatter("%d %b", tz=frame.index.tz))
    return fig


def _acf_figure(residuals, step_s, diagnose):
    r = residuals.to_numpy(dtype=float)
    n = int(np.isfinite(r).sum())
    max_lag = int(min(48 * 3600 / step_s, max(n // 4, 2)))
    acf = diagnose.autocorrelation(r, max_lag)
    lags_h = np.arange(acf.size) * step_s / 3600.0
    fig, (ax,) = _figure(9.0, 3.2)
    ax.axhline(0, color=SLATE, linewidth=0.6)
    band = 1.959963984540054 / math.sqrt(max(n, 1))
    ax.axhspan(-band, band, color=SAND, alpha=0.4, linewidth=0, label="±1.96/√n (white noise, 95 %)")
    ax.plot(lags_h, acf, color=TEAL, linewidth=1.2, label="sample autocorrelation")
    ax.set_xlabel("lag [h]")
    ax.set_ylabel("autocorrelation [-]")
    ax.set_ylim(min(-0.2, float(np.nanmin(acf)) - 0.05), 1.05)
    ax.legend(loc="upper right", fontsize=8, frameon=False)
    return fig, acf


def _signature_figure(daily, result, label, frame, observed):
    fig, (ax,) = _figure(6.6, 4.2)
    days = pd.DatetimeIndex(daily.index)
    mine = np.asarray(days.strftime("%Y-%m") == label)
    ax.scatter(daily["outdoor_mean_c"][~mine], daily["heating_kwh"][~mine], s=16, color=SLATE, alpha=0.55,
               label="other months", linewidths=0)
    ax.scatter(daily["outdoor_mean_c"][mine], daily["heating_kwh"][mine], s=22, color=EMBER,
               label=label, linewidths=0)
    if len(daily):
        # The calibrated model in steady state at the log's mean indoor temperature and mean gains.
        ok = observed & frame["indoor_c"].notna().to_numpy()
        inputs = _model_frame(result, frame)
        ti = float(frame.loc[ok, "indoor_c"].mean())
        gains = float(inputs["internal_w"][ok].mean())
        aperture = float(result.parameters.get("solar_aperture_m2", 0.0))
        solar = aperture * float(inputs["solar_w_m2"][ok].mean())
        ua = float(result.heat_loss_coefficient_w_per_k)
        lo, hi = float(daily["outdoor_mean_c"].min()) - 2, float(daily["outdoor_mean_c"].max()) + 2
        to = np.linspace(lo, hi, 50)
        line = np.clip(ua * (ti - to) - gains - solar, 0, None) * 24.0 / 1000.0
        ax.plot(to, line, color=TEAL, linewidth=1.6,
                label=f"calibrated model: UA {ua:.0f} W/K at {ti:.1f} °C indoor, mean gains")
    ax.set_xlabel("daily mean outdoor temperature [°C]")
    ax.set_ylabel("daily heating energy [kWh/day]")
    ax.legend(loc="upper right", fontsize=8, frameon=False)
    return fig


def _months_figure(monthly, label):
    fig, (ax,) = _figure(7.5, 3.4)
    x = np.arange(len(monthly))
    cols = [c for c in monthly.columns if c.startswith("expected_") and c.endswith("_kwh")]
    width = 0.8 / (1 + len(cols))
    ax.bar(x - 0.4 + width / 2, monthly["metered_kwh"], width, color=SLATE, label="metered")
    palette = [TEAL, SAND, MOSS]
    for i, c in enumerate(cols):
        what = c[len("expected_"):-len("_kwh")]
        ax.bar(x - 0.4 + width * (i + 1.5), monthly[c], width, color=palette[i % 3],
               label=f"model, following the {'measured indoor temperature' if what == 'indoor' else 'setpoint'}")
    ax.set_xticks(x, [f"{m}{' (this report)' if m == label else ''}" for m in monthly.index], fontsize=8)
    ax.set_ylabel("heating energy [kWh]")
    ax.set_xlabel("month")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.28), ncols=3, fontsize=8, frameon=False)
    return fig


# -- sections ------------------------------------------------------------------------------
def _fmt(value, digits=3):
    if value is None:
        return "–"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if not math.isfinite(v):
            return "–"
        if v != 0 and (abs(v) >= 1e6 or abs(v) < 1e-3):
            return f"{v:.{digits}g}"
        if abs(v) >= 100:
            return f"{v:,.0f}"
        return f"{v:.{digits}g}" if abs(v) < 1 else f"{v:.{max(digits - len(str(int(abs(v)))), 0)}f}"
    return str(value)


def _align(value):
    # Text cells read better left-aligned; numbers stay right-aligned so digits line up.
    return " class='t'" if isinstance(value, str) and len(value) > 5 else ""


def _table_html(frame, columns=None, headers=None, index_label=None):
    columns = list(columns or frame.columns)
    headers = headers or {}
    head = "".join(f"<th>{html.escape(headers.get(c, c.replace('_', ' ')))}</th>" for c in columns)
    idx = html.escape(index_label or (frame.index.name or "").replace("_", " "))
    body = []
    for key, row in frame.iterrows():
        cells = "".join(
            f"<td{_align(row[c])}>{html.escape(_fmt(row[c]))}</td>" for c in columns)
        body.append(f"<tr><th scope='row'>{html.escape(str(key))}</th>{cells}</tr>")
    return f"<table><thead><tr><th>{idx}</th>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _p(text):
    return f"<p>{html.escape(text)}</p>"


def _fig_html(rep, name):
    caption, _ = rep.figures[name]
    return f"<figure><img alt='{html.escape(caption)}' src='@@{name}@@'><figcaption>{html.escape(caption)}</figcaption></figure>"


def _setback_section(rep, home, result, label):
    from thermorc.read import read_weather
    from thermorc.setback import compare, read_strategies

    strategies = read_strategies(home.strategies)
    if home.weather is None:
        return _p("A strategies file is given, but the setback comparison needs a weather file (a year of "
                  "weather): add weather = \"...\" to the home file.")
    weather, meta = read_weather(home.weather, tz=home.tz)
    found = compare(result, model_weather(result, weather, home.site), strategies, tz=home.tz)
    table = found.table.copy()
    if label in found.monthly_kwh.index:
        table.insert(1, f"heating_{label}_kwh", found.monthly_kwh.loc[label].reindex(table.index).to_numpy())
    rep.tables["setback"] = table
    rep.facts["setback"] = {name: {"heating_kwh": float(r["heating_kwh"]), "savings_pct": float(r["savings_pct"])}
                            for name, r in table.iterrows()}
    cols = [c for c in ("heating_kwh", f"heating_{label}_kwh", "savings_kwh", "savings_pct", "peak_heating_w",
                        "unmet_hours", "min_occupied_indoor_c", "mean_recovery_h", "max_recovery_h") if c in table]
    for c in found.cautions:
        if c not in rep.cautions and not c.startswith("Calibration warning"):
            rep.cautions.append(c)
    period = f"{weather.index[0]:%Y-%m-%d} to {weather.index[-1]:%Y-%m-%d}"
    return (_p(f"Strategies of {os.path.basename(home.strategies)} run through the weather file "
               f"{os.path.basename(home.weather)} ({period}) by the calibrated model; the heater is "
               f"'{strategies.heater or 'ideal'}'"
               + (f" with {strategies.capacity_w:,.0f} W" if strategies.capacity_w else "") + ". Savings are "
               "against the first row.")
            + _table_html(table, cols, {"heating_kwh": "heating kWh (file)", f"heating_{label}_kwh": f"kWh in {label}",
                                         "savings_pct": "savings %", "peak_heating_w": "peak W",
                                         "min_occupied_indoor_c": "min occupied °C",
                                         "mean_recovery_h": "mean recovery h", "max_recovery_h": "max recovery h"}))


def _biot_section(rep, construction, result, step_s):
    from thermorc.construction import analyse_construction
    from thermorc.iso13790 import plausibility_details

    found = analyse_construction(construction, timestep_s=step_s)
    whole = found["whole_home"]
    elements = pd.DataFrame([{
        "element": e["name"], "kind": e["kind"], "area_m2": e["area_m2"], "u_value_w_m2k": e["u_value_w_m2k"],
        "biot": e["biot"], "lumped_ok": None if e["lumped_ok"] is None else ("yes" if e["lumped_ok"] else "no"),
        "lumping_error_pct": None if e["lumping_error"] is None else e["lumping_error"]["max_error_mean_pct"],
    } for e in found["elements"]]).set_index("element")
    rep.tables["biot"] = elements
    ua_se = float(result.std_errors.get("heat_loss_coefficient_w_per_k", math.nan))
    plaus = result.extras.get("plausibility")
    if plaus is None and math.isfinite(ua_se):
        plaus = plausibility_details(float(result.heat_loss_coefficient_w_per_k), float(result.capacitance_j_per_k),
                                     ua_se, construction)
    rec = found["recommendation"]
    rep.facts["construction_ua_w_per_k"] = float(whole["ua_w_per_k"])
    rep.facts["suggested_model"] = rec["preset"]
    parts = [
        _p(f"Construction UA {whole['ua_w_per_k']:.0f} W/K (transmission {whole['transmission_ua_w_per_k']:.0f}, "
           f"air leakage {whole['air_leakage_w_per_k']:.0f}); daily effective heat capacity "
           f"{whole['effective_capacity_j_per_k'] / 1e6:.1f} MJ/K; time constant {whole['time_constant_h']:.0f} h. "
           f"Suggested model: {rec['preset']}; calibrated: {result.model}."),
    ]
    parts += [_p(t) for t in rec.get("text", [])]
    if plaus:
        parts.append(_p(f"Calibrated UA {plaus['calibrated_ua_w_per_k']:.0f} W/K against the construction's "
                        f"{plaus['construction_ua_w_per_k']:.0f} W/K: difference "
                        f"{plaus['ua_difference_w_per_k']:+.0f} W/K, {plaus['ua_z']:+.1f} combined standard "
                        "uncertainties."))
        parts += [_p(f"Check: {w}") for w in plaus.get("warnings", [])]
    parts.append(_table_html(elements, headers={"area_m2": "area m²", "u_value_w_m2k": "U W/(m² K)", "biot": "Bi",
                                                "lumped_ok": "one node?", "lumping_error_pct": "lumping error %"}))
    for c in found.get("cautions", []):
        if c not in rep.cautions:
            rep.cautions.append(c)
    return "".join(parts)


def _sections(rep, report_quality, in_month, frame, follow_note, comp_meta, setback_html, biot_html, sig):
    f, result = rep.facts, rep.result
    ua_lo, ua_hi = (f["heat_loss_coefficient_95_w_per_k"] + [math.nan, math.nan])[:2]
    g14 = rep.tables["guideline14"]
    hourly_meets = g14.loc["hourly", "meets"]
    cards = [
        ("heating this month", f"{f['metered_kwh']:,.0f} kWh", "metered"),
        ("model expectation", f"{f['expected_kwh']:,.0f} kWh",
         f"metered {f['metered_vs_expected_pct']:+.0f} %" if math.isfinite(f["metered_vs_expected_pct"]) else ""),
        ("heat loss coefficient", f"{f['heat_loss_coefficient_w_per_k']:.0f} W/K",
         f"95 %: {_fmt(ua_lo)} to {_fmt(ua_hi)}"),
        ("slowest time constant", f"{f['time_constants_h'][0]:.0f} h" if f["time_constants_h"] else "–",
         f"model {f['model']}"),
        ("Guideline 14, hourly", {"yes": "met", "no": "not met"}.get(hourly_meets, "n/a"), "heating energy"),
        ("mean outdoor", f"{f['outdoor_mean_c']:.1f} °C", f"{f['observed_days']:.1f} days logged"),
    ]
    if f.get("metered_kwh_per_m2"):
        cards.append(("per floor area", f"{f['metered_kwh_per_m2']:.1f} kWh/m²", f"{f['floor_area_m2']:.0f} m²"))
    card_html = "".join(
        f"<div class='card'><div class='k'>{html.escape(k)}</div><div class='v'>{html.escape(v)}</div>"
        f"<div class='s'>{html.escape(s)}</div></div>" for k, v, s in cards)
    sections = [("At a glance", f"<div class='cards'>{card_html}</div>")]

    month_rows = frame.loc[in_month]
    coverage = float(month_rows[["indoor_c", "heating_w", "outdoor_c"]].notna().all(axis=1).mean())
    q = [_p(f"Verdict on the whole log: {report_quality.verdict}. Models the data support: "
            f"{', '.join(report_quality.supported) or 'none'}. In {rep.month}, {100 * coverage:.1f} % of the "
            "model intervals have indoor temperature, heating and outdoor temperature.")]
    q.append(f"<pre>{html.escape(report_quality.to_text())}</pre>")
    if rep.notes:
        q.append("<ul class='notes'>" + "".join(f"<li>{html.escape(n)}</li>" for n in rep.notes) + "</ul>")
    sections.append(("Data quality", "".join(q)))

    data = result.extras.get("data") or {}
    params = rep.tables["parameters"]
    sections.append(("Calibrated model", (
        _p(f"Model {result.model}, fitted by {result.fit.get('estimator', 'output error')} on "
           f"{str(data.get('start', ''))[:10]} to {str(data.get('end', ''))[:10]} "
           f"({result.fit.get('n_samples', '?')} samples); covariance: {result.fit.get('covariance', '–')}. "
           "Intervals are 95 % (log-normal for positive parameters).")
        + _table_html(params, ["unit", "value", "low_95", "high_95"], {"low_95": "95 % low", "high_95": "95 % high"})
        + "<h3>ASHRAE Guideline 14 (heating energy, model following the measured indoor temperature)</h3>"
        + _table_html(g14, ["periods", "cv_rmse_pct", "cv_rmse_limit_pct", "nmbe_pct", "nmbe_limit_pct", "meets",
                            "applies"],
                      {"cv_rmse_pct": "CV(RMSE) %", "cv_rmse_limit_pct": "limit %", "nmbe_pct": "NMBE %",
                       "nmbe_limit_pct": "limit ± %"})
        + _p("Guideline 14 sets CV(RMSE) at most 30 % and NMBE within ±10 % for hourly calibration data, 15 % and "
             "±5 % for monthly data; NMBE is measured minus model, so a positive value means the model "
             "under-predicts. The criteria were written for whole-building energy models; a home's on/off "
             "heating makes hourly energy noisy, so the hourly CV(RMSE) of a thermostat log is often high even "
             f"when the temperatures fit well (here RMSE {f['temperature_rmse_k']:.2f} K).")
        + _share_html(result)
        + _validation_html(result.extras.get("validation"))
    )))
    if "model_comparison" in rep.tables:
        sections.append(("Model comparison", (
            _p(f"Each model was fitted on the first {100 * (1 - comp_meta.get('holdout_fraction', 0.2)):.0f} % of the "
               f"log and predicted the rest open loop. Rule: {comp_meta.get('rule', '')}; chosen: "
               f"{comp_meta.get('chosen', result.model)}. BIC and likelihood-ratio p-values are shown for the "
               "record: output-error residuals are autocorrelated, which makes both favour larger models.")
            + _table_html(rep.tables["model_comparison"], headers={
                "train_rmse_k": "train RMSE K", "holdout_rmse_k": "held-out RMSE K", "bic": "BIC",
                "lr_p_value_vs_simpler": "LR p vs simpler", "ua_w_per_k": "UA W/K",
                "slowest_time_constant_h": "slowest τ h"}))))
    sections.append(("Measured and modelled indoor temperature", (
        _fig_html(rep, "indoor")
        + _p("The model runs open loop from the metered heating and the weather: it is not corrected by the "
             "measured temperature along the way, so a drift between the two lines is a real model error."))))
    lb_html = ""
    if "ljung_box" in rep.tables:
        lb_html = _table_html(rep.tables["ljung_box"], ["lag_h", "statistic", "df", "p_value"],
                              {"lag_h": "lag h", "p_value": "p"}, index_label="lag (steps)")
    sections.append(("Residual diagnostics", (
        _fig_html(rep, "residuals")
        + _p("White-noise residuals stay inside the band. Output-error residuals of a lumped model are "
             "autocorrelated (slow, unmodelled gains and mass), so the parameter intervals use the Newey-West "
             "covariance; the Ljung-Box test below says how far from white they are (small p: not white).")
        + lb_html)))
    ua_sig = sig["ua_w_per_k"]
    sig_text = (f"A straight line through all days (daily heating power against indoor minus outdoor "
                f"temperature) gives UA {ua_sig:.0f} W/K (R² {sig['r2']:.2f}, {sig['n_days']} days), against "
                f"{f['heat_loss_coefficient_w_per_k']:.0f} W/K from the dynamic calibration.") if math.isfinite(
        ua_sig) else "Too few complete days for a straight-line signature fit."
    sections.append(("Energy signature", _fig_html(rep, "signature") + _p(
        "Each point is one day with at least 90 % of its intervals logged. " + sig_text
        + " Heat stored in the structure, sun and occupants scatter the points; a shift of the whole cloud "
          "from one month to the next is what a retrofit or a fault looks like.")))
    monthly = rep.tables["monthly_energy"]
    cols = [c for c in monthly.columns if c not in ("signature_days",)]
    sections.append(("Heating energy: this month, the model and earlier months", (
        _p(f"The expectation is the heat an ideal heater must deliver for the calibrated model to follow "
           f"{follow_note}, under each month's logged weather. A ratio of metered to expected energy that "
           "moves away from 1, or a signature UA that changes from month to month, is drift: a change of the "
           "building, its heating system or its use since the calibration period.")
        + _fig_html(rep, "months")
        + _table_html(monthly, cols, {
            "days": "days", "outdoor_mean_c": "outdoor °C", "indoor_mean_c": "indoor °C",
            "heating_degree_days_18_k_day": "HDD 18 °C K·d", "metered_kwh": "metered kWh",
            "expected_indoor_kwh": "model (indoor) kWh", "ratio_indoor": "metered / model (indoor)",
            "expected_setpoint_kwh": "model (setpoint) kWh", "ratio_setpoint": "metered / model (setpoint)",
            "signature_ua_w_per_k": "signature UA W/K"}))))
    if setback_html:
        sections.append(("Setback strategies", setback_html))
    if biot_html:
        sections.append(("Construction and the Biot check", biot_html))
    sections.append(("Cautions", "<ul class='cautions'>" + "".join(
        f"<li>{html.escape(c)}</li>" for c in rep.cautions) + "</ul>"))
    prov = (result.extras.get("provenance") or {}).get("inputs", {})
    if prov:
        sections.append(("Inputs", _table_html(pd.DataFrame.from_dict(prov, orient="index").rename_axis("input"),
                                               headers={"sha256": "SHA-256"})))
    return sections


# -- output --------------------------------------------------------------------------------
_CSS = """
:root{--ink:#23303d;--muted:#5d6b7a;--line:#d9dde3;--teal:#1d6a72;--ember:#d2603a;--paper:#fbfaf7}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:15px/1.5 "DejaVu Sans",Verdana,sans-serif}
header{background:var(--teal);color:#fff;padding:22px 40px 18px}
header h1{margin:0;font-size:24px;font-weight:600}
header p{margin:4px 0 0;opacity:.9}
main{max-width:1060px;margin:0 auto;padding:10px 40px 40px}
section{border-bottom:1px solid var(--line);padding:8px 0 18px}
h2{font-size:18px;color:var(--teal);margin:18px 0 8px}
h3{font-size:15px;margin:16px 0 6px}
table{border-collapse:collapse;margin:8px 0;font-size:13px;width:100%}
th,td{border-bottom:1px solid var(--line);padding:4px 8px;text-align:right;vertical-align:top}
thead th{background:#eef1f3;text-align:right}
tbody th,thead th:first-child{text-align:left;font-weight:600;white-space:nowrap}
td.t{text-align:left}
pre{background:#f1f0eb;padding:10px;font-size:12px;overflow-x:auto;white-space:pre-wrap}
figure{margin:10px 0}
figure img{max-width:100%;height:auto;border:1px solid var(--line);background:#fff}
figcaption{color:var(--muted);font-size:13px}
.cards{display:grid;grid-template-columns:repeat(auto-fill,minmax(150px,1fr));gap:10px}
.card{background:#fff;border:1px solid var(--line);border-left:4px solid var(--ember);padding:8px 12px}
.card .k{color:var(--muted);font-size:12px;text-transform:uppercase;letter-spacing:.04em}
.card .v{font-size:21px;font-weight:600}
.card .s{color:var(--muted);font-size:12px}
ul.cautions li{margin:4px 0}
ul.cautions{border-left:4px solid var(--ember);background:#fff;padding:8px 8px 8px 30px}
footer{color:var(--muted);font-size:12px;padding:14px 40px}
@media print{header{background:none;color:var(--ink)}figure{break-inside:avoid}}
"""


def _png(fig):
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110)
    return buffer.getvalue()


def render_html(report):
    """
    The report as one self-contained HTML document.

    Parameters
    ----------
    report : MonthlyReport

    Returns
    -------
    str
        HTML5 with inline CSS and the figures as ``data:image/png;base64`` URIs; it loads
        nothing from outside.
    """
    from thermorc import __version__

    body = "".join(f"<section id='{re.sub(r'[^a-z0-9]+', '-', t.lower()).strip('-')}'><h2>{html.escape(t)}</h2>"
                   f"{h}</section>" for t, h in report.sections)
    for name, (_, fig) in report.figures.items():
        body = body.replace(f"@@{name}@@", "data:image/png;base64," + base64.b64encode(_png(fig)).decode("ascii"))
    title = f"{report.home.name}: heating report {report.month}"
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return (
        "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        "<link rel='icon' href='data:,'>"
        f"<title>{html.escape(title)}</title><style>{_CSS}</style></head><body>"
        f"<header><h1>{html.escape(report.home.name)}</h1><p>Monthly heating report, {report.month} · model "
        f"{html.escape(report.result.model)}</p></header><main>{body}</main>"
        f"<footer>Made by thermorc {html.escape(__version__)} on {stamp}. Figures are model estimates; see the "
        "cautions.</footer></body></html>\n"
    )


def render_pdf(report):
    """
    The report's key figures, tables and cautions as a PDF (one page per item).

    Parameters
    ----------
    report : MonthlyReport

    Returns
    -------
    bytes
        PDF made with matplotlib's PDF backend.
    """
    import textwrap

    from matplotlib.backends.backend_pdf import PdfPages

    buffer = io.BytesIO()
    with PdfPages(buffer) as pdf:
        def text_page(title, lines):
            from matplotlib.figure import Figure

            fig = Figure(figsize=(8.27, 11.69))
            fig.text(0.06, 0.96, title, fontsize=12, color=TEAL, va="top")
            fig.text(0.06, 0.93, "\n".join(lines), va="top", ha="left", family="monospace", fontsize=6.5)
            pdf.savefig(fig)

        f = report.facts
        head = [f"{report.home.name}", f"Monthly heating report {report.month}", ""]
        head += [f"{k}: {_fmt(v) if not isinstance(v, list) else ', '.join(_fmt(x) for x in v)}"
                 for k, v in f.items() if not isinstance(v, dict)]
        text_page("At a glance", head)
        for name, (caption, fig) in report.figures.items():
            fig.suptitle(caption, fontsize=9, x=0.01, ha="left")
            pdf.savefig(fig)
            fig.suptitle("")
        for name, table in report.tables.items():
            if name == "daily_energy":
                continue
            shown = table.map(lambda v: _fmt(v)) if hasattr(table, "map") else table
            lines = shown.to_string(max_colwidth=40).splitlines()
            text_page(f"Table: {name.replace('_', ' ')}", lines[:120])
        wrapped = []
        for c in report.cautions:
            wrapped += textwrap.wrap(c, 100, initial_indent="- ", subsequent_indent="  ") + [""]
        text_page("Cautions", wrapped)
    return buffer.getvalue()


def write_report(report, out_dir, pdf=False):
    """
    Write the report: HTML, the tables as CSV and optionally a PDF.

    Everything is rendered in memory first and each file is written atomically, so a failure
    leaves no half-written file.

    Parameters
    ----------
    report : MonthlyReport
    out_dir : str or os.PathLike
        Output folder (created when missing).
    pdf : bool
        Also write the PDF.

    Returns
    -------
    list of str
        Paths written, the HTML first.
    """
    from thermorc.write import write_bytes, write_csv, write_json, write_text

    stem = f"report-{report.month}"
    page = render_html(report)
    pdf_bytes = render_pdf(report) if pdf else None
    out_dir = os.fspath(out_dir)
    os.makedirs(out_dir, exist_ok=True)
    paths = [os.path.join(out_dir, f"{stem}.html")]
    write_text(paths[0], page)
    for name, table in report.tables.items():
        path = os.path.join(out_dir, f"{stem}-{name.replace('_', '-')}.csv")
        write_csv(path, table)
        paths.append(path)
    path = os.path.join(out_dir, f"{stem}-facts.json")
    write_json(path, {**report.facts, "cautions": report.cautions, "notes": report.notes})
    paths.append(path)
    if pdf_bytes is not None:
        paths.append(os.path.join(out_dir, f"{stem}.pdf"))
        write_bytes(paths[-1], pdf_bytes)
    return paths
