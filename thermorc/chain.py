"""
The chain from files to model inputs: read -> align -> weather and sun on the model grid.

Commands that start from a log (``calibrate``, ``simulate``, ``report``, ``fleet``) all need
the same steps in the same order; :func:`prepare_log` runs them once and keeps what each
produced. It adds no algorithm of its own.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.align import AlignedData, align, align_weather
from thermorc.errors import DataQualityWarning, FitQualityWarning, InputError
from thermorc.read import _sniff_weather, check_file, read_log, read_weather

__all__ = ["PreparedLog", "prepare_log", "parse_site", "parse_window_areas", "calibrate_files", "simulate_files", "vertical_irradiance"]

#: Solar input of calibrated models when the site is known: the sum of the irradiance on the
#: four vertical façades. [W m⁻²]
SOLAR_COLUMN = "solar_vertical_w_m2"


@dataclass
class PreparedLog:
    """
    A log on the model grid with weather and irradiance filled in.

    Attributes
    ----------
    aligned : AlignedData
        Output of :func:`thermorc.align.align`, with ``outdoor_c`` and ``ghi_w_m2`` added
        from the weather file or the clear-sky model where the log has none.
    metadata : dict
        The log reader's metadata.
    weather_metadata : dict or None
        The weather reader's metadata.
    site : dict
        ``latitude``, ``longitude``, ``altitude_m`` where known.
    notes : list of str
        Decisions taken on the way (sources of outdoor temperature and irradiance).
    """

    aligned: AlignedData
    metadata: dict
    weather_metadata: dict | None = None
    site: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def data(self):
        """The aligned table."""
        return self.aligned.data


def parse_site(text):
    """
    Read ``"LAT,LON"`` (decimal degrees) from the command line.

    Parameters
    ----------
    text : str
        Latitude and longitude separated by a comma, e.g. ``"36.10,-79.95"``.

    Returns
    -------
    dict
        ``{"latitude": float, "longitude": float}``.
    """
    try:
        lat_s, lon_s = str(text).split(",")
        lat, lon = float(lat_s), float(lon_s)
    except ValueError:
        raise InputError(f"--site is {text!r} (expected LAT,LON in decimal degrees, e.g. 36.10,-79.95)") from None
    if not (-90 <= lat <= 90 and -180 <= lon <= 180):
        raise InputError(f"--site {text!r} is off the globe (latitude -90..90, longitude -180..180)")
    return {"latitude": lat, "longitude": lon}


def parse_window_areas(text, name="--window-areas"):
    """
    Read the glazing area per façade from the command line, as façade weights of the solar input.

    Parameters
    ----------
    text : str or dict
        ``FACING=AREA`` pairs separated by commas (or semicolons, handy in a CSV cell), e.g.
        ``"S=8,E=3,W=3,N=4"``: a compass point
        (N, NE, E, SE, S, SW, W, NW) or an azimuth clockwise from north [deg], and the window
        area facing it [m²]. Windows of one façade may be added up or given one by one. A
        dict ``{FACING: AREA}`` (a TOML table) reads the same.
    name : str
        The option or key named in error messages.

    Returns
    -------
    dict
        ``{"n", "e", "s", "w"}`` -> weight with mean 1, each façade's share of the area times
        four (:func:`thermorc.construction.facade_weights`).

    Notes
    -----
    The weights count area alone: all windows are taken to transmit alike. A construction with
    ``g_value`` per window weights by :math:`g A` instead.
    """
    from thermorc.construction import _COMPASS_DEG, facade_weights

    if isinstance(text, dict):
        text = ",".join(f"{facing}={area}" for facing, area in text.items())
    windows = []
    for part in str(text).replace(";", ",").split(","):
        facing, sep, area_s = part.partition("=")
        facing = facing.strip().upper()
        try:
            azimuth = _COMPASS_DEG[facing] if facing in _COMPASS_DEG else float(facing)
            area = float(area_s)
        except ValueError:
            raise InputError(f"{name} part {part.strip()!r} is not FACING=AREA (e.g. S=8: a compass point "
                             "or an azimuth in degrees, and m2 of window)") from None
        if not sep or not (np.isfinite(azimuth) and np.isfinite(area)) or area < 0:
            raise InputError(f"{name} part {part.strip()!r} is not FACING=AREA with an area of 0 m2 or more")
        windows.append((azimuth, area))
    weights = facade_weights(windows)
    if weights is None:
        raise InputError(f"{name} {text!r} adds up to no window area")
    return weights


def prepare_log(
    log_path,
    column_map=None,
    tz=None,
    interval=None,
    weather_path=None,
    site=None,
    step_s=None,
    *,
    table=None,
    solar_weights=None,
    weights_from="the construction's windows",
):
    """
    Read a log, put it on a uniform grid, and fill outdoor temperature and irradiance.

    Parameters
    ----------
    log_path : str or os.PathLike
        The log (CSV, Parquet, Excel).
    column_map : str, os.PathLike or dict, optional
        Column map for other layouts (docs/data-formats.md).
    tz : str, optional
        IANA time zone of naive times.
    interval : {'start', 'end'}, optional
        Interval label of the log's powers.
    weather_path : str or os.PathLike, optional
        TMY3, EPW or weather CSV; it supplies outdoor temperature and irradiance where the
        log has none. A typical-year file is coerced to the log's year.
    site : dict, optional
        ``latitude`` and ``longitude`` [deg], for the clear-sky fallback; default: the
        weather file's.
    step_s : float, optional
        Model grid step [s]; default: the log's median spacing (at least 60 s).
    table : pandas.DataFrame, optional
        The log's cells already read (see :func:`thermorc.read.read_log`); ``log_path`` then
        only names the log.
    solar_weights : dict, optional
        Façade weights of the solar input (see :func:`vertical_irradiance`).
    weights_from : str
        Where the weights came from, for the notes.

    Returns
    -------
    PreparedLog
    """
    data, meta = read_log(log_path, column_map=column_map, tz=tz, interval=interval, table=table)
    if step_s is None:
        step_s = max(float(meta.get("median_step_s") or 300.0), 60.0)
    aligned = align(data, float(step_s), path=str(log_path))
    frame = aligned.data
    notes = []
    site = dict(site or {})
    weather_meta = None
    weather_on_grid = None
    need_outdoor = "outdoor_c" not in frame.columns or frame["outdoor_c"].isna().all()
    need_sun = "ghi_w_m2" not in frame.columns or frame["ghi_w_m2"].isna().all()
    if weather_path is not None:
        year = int(frame.index[0].year)
        # Only typical-year files (TMY3, EPW) move to the log's year; a weather CSV is dated
        # measured weather, and coercing it would fold a log across New Year onto one year.
        typical = _sniff_weather(check_file(weather_path)) != "csv"
        weather, weather_meta = read_weather(weather_path, tz=frame.index.tz, coerce_year=year if typical else None)
        if weather_meta.get("source_format") in ("tmy3", "epw") and frame.index[-1].year != year:
            # A log across New Year needs the typical year twice.
            nxt, _ = read_weather(weather_path, tz=frame.index.tz, coerce_year=year + 1)
            weather = pd.concat([weather, nxt]).sort_index()
            weather = weather[~weather.index.duplicated()]
        on_grid = align_weather(weather, frame.index, path=str(weather_path))
        weather_on_grid = on_grid
        for column in ("outdoor_c", "ghi_w_m2"):
            if column in on_grid and (column not in frame.columns or frame[column].isna().all()):
                frame[column] = on_grid[column]
                notes.append(f"{column} from {weather_meta.get('source_format', 'weather')} file")
            elif column in on_grid and column in frame.columns:
                # Fill holes in the log's own reading from the weather file, and say so.
                holes = frame[column].isna() & on_grid[column].notna()
                if holes.any():
                    frame.loc[holes, column] = on_grid.loc[holes, column]
                    notes.append(f"{int(holes.sum())} missing {column} values filled from the weather file")
        for key in ("latitude", "longitude", "altitude_m"):
            if weather_meta.get(key) is not None and key not in site:  # a CSV may not give its site
                site[key] = weather_meta[key]
        notes.extend(weather_meta.get("notes", []))
    elif need_outdoor:
        raise InputError(
            "the log has no outdoor_c column; give a weather file with --weather", path=str(log_path), column="outdoor_c"
        )
    if need_sun and weather_path is None:
        if "latitude" in site and "longitude" in site:
            from thermorc.solar import clear_sky_ghi

            msg = (
                "no measured irradiance in the log or a weather file: using pvlib's clear-sky model, which "
                "overstates the sun on cloudy days (the solar aperture will come out too small)"
            )
            warnings.warn(msg, DataQualityWarning, stacklevel=2)
            frame["ghi_w_m2"] = clear_sky_ghi(frame.index, site["latitude"], site["longitude"], site.get("altitude_m", 0.0)).to_numpy()
            notes.append(msg)
        else:
            notes.append("no irradiance and no site: solar gains are not modelled (give --site LAT,LON or --weather)")
    has_ghi = "ghi_w_m2" in frame.columns and frame["ghi_w_m2"].notna().any()
    if has_ghi and "latitude" in site and "longitude" in site:
        frame[SOLAR_COLUMN] = vertical_irradiance(frame, site, weather_on_grid, weights=solar_weights)
        notes.append("solar gains follow the irradiance on the four vertical façades (pvlib transposition)"
                     + (f", weighted by {weights_from}" if solar_weights else
                        ", all weighted alike (give the window areas per façade, --window-areas, or a construction "
                        "where the windows face mostly one way)"))
    elif has_ghi:
        msg = ("the site is not known, so solar gains follow the horizontal irradiance, which tracks the sun through "
               "windows poorly in winter; give --site LAT,LON for the sum over the four vertical façades")
        warnings.warn(msg, DataQualityWarning, stacklevel=2)
        notes.append(msg)
    aligned.data = frame
    # The gap mask covers the columns added here too.
    aligned.gap_mask = frame.isna().any(axis=1)
    return PreparedLog(aligned=aligned, metadata=meta, weather_metadata=weather_meta, site=site, notes=notes)


def vertical_irradiance(frame, site, weather=None, weights=None):
    """
    Sum of the irradiance on vertical walls facing N, E, S and W: the solar input of models.

    Windows of homes are vertical, and in the heating season the sun is low, so irradiance
    on vertical façades follows window gains far better than the horizontal irradiance does
    (ISO 13790:2008, clause 11.3, computes solar gains per orientation; from memory). The
    calibrated aperture multiplies the sum of the four façades, so it does not assume where
    the windows are. Where beam and diffuse parts are not given, GHI is split by the Erbs
    correlation.

    Parameters
    ----------
    frame : pandas.DataFrame
        ``ghi_w_m2`` [W m⁻²] on a tz-aware, interval-start index.
    site : dict
        ``latitude``, ``longitude`` [deg] and optionally ``altitude_m`` [m].
    weather : pandas.DataFrame, optional
        ``dni_w_m2`` and ``dhi_w_m2`` [W m⁻²] on the same index, when a weather file gave them.
    weights : dict, optional
        Weight of each façade, keys ``n``, ``e``, ``s``, ``w`` with mean 1 (e.g. from
        :func:`thermorc.construction.window_facade_weights`); default: 1 each, the plain sum.

    Returns
    -------
    numpy.ndarray
        Sum of the (weighted) plane-of-array irradiance of the four façades. [W m⁻²]
    """
    from thermorc.solar import facade_arrays

    ghi = frame["ghi_w_m2"].to_numpy(dtype=float)
    dni = dhi = None
    if weather is not None and {"dni_w_m2", "dhi_w_m2"} <= set(weather.columns):
        dni = weather["dni_w_m2"].to_numpy(dtype=float)
        dhi = weather["dhi_w_m2"].to_numpy(dtype=float)
        if np.isnan(dni).any() or np.isnan(dhi).any():
            dni = dhi = None
    ghi_ok = ~np.isnan(ghi)
    # Holes in GHI are zero for the transposition and NaN again in the sum.
    poa = facade_arrays(
        np.where(ghi_ok, ghi, 0.0), frame.index, site["latitude"], site["longitude"], site.get("altitude_m", 0.0) or 0.0,
        dni=dni, dhi=dhi,
    )
    weights = weights or {}
    total = sum(float(weights.get(f, 1.0)) * poa[f"poa_{f}_w_m2"] for f in "nesw")
    return np.where(ghi_ok, total, np.nan)


def file_digest(path):
    """
    SHA-256 of a file, for the provenance recorded in result files.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    str
        Hex digest.
    """
    import hashlib

    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def table_digest(table):
    """
    SHA-256 of a table's cells, for the provenance of a log that was handed over already read.

    Parameters
    ----------
    table : pandas.DataFrame or pyarrow.Table
        The cells (a DataFrame without its index).

    Returns
    -------
    str
        Hex digest of the table in the Apache Arrow IPC streaming format (schema, then the
        record batches), so equal cells of equal types give equal digests.

    References
    ----------
    Apache Arrow, "Columnar Format", section "Serialization and Interprocess Communication
    (IPC)". NIST FIPS 180-4, "Secure Hash Standard (SHS)," 2015 (SHA-256).
    """
    import hashlib

    import pyarrow as pa

    if isinstance(table, pd.DataFrame):
        table = pa.Table.from_pandas(table, preserve_index=False)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return hashlib.sha256(sink.getvalue()).hexdigest()


def provenance(**paths):
    """
    Version and input hashes for a result file.

    Parameters
    ----------
    **paths : str or os.PathLike or None
        Named input files; ``None`` entries are skipped.

    Returns
    -------
    dict
        ``{"thermorc_version": ..., "inputs": {name: {"file": basename, "sha256": ...}}}``.
    """
    from thermorc import __version__

    inputs = {}
    for name, path in paths.items():
        if path is not None:
            inputs[name] = {"file": os.path.basename(os.fspath(path)), "sha256": file_digest(path)}
    return {"thermorc_version": __version__, "inputs": inputs}


def _test_cut(index, test_days, log_path):
    """First row of the held-out tail of ``test_days`` days (checked by :func:`check_test_days`)."""
    span_days = (index[-1] - index[0]).total_seconds() / 86400.0
    if test_days >= span_days:
        raise InputError(f"--test-days {test_days:g} leaves nothing to calibrate on: the log covers "
                         f"{span_days:.1f} days", path=str(log_path))
    cut = int(index.searchsorted(index[-1] - pd.Timedelta(days=test_days), side="right"))
    if len(index) - cut < 2:
        raise InputError(f"--test-days {test_days:g} keeps fewer than two rows back", path=str(log_path))
    return cut


def check_test_days(test_days):
    """
    A held-out span of ``--test-days``, or :class:`InputError`.

    Parameters
    ----------
    test_days : float or None
        Days at the end of a log kept back from the fit. [d]
    """
    if test_days is not None and not (np.isfinite(test_days) and test_days > 0):
        raise InputError(f"--test-days {test_days:g} is not allowed (expected a positive number of days)")


def calibrate_files(
    log_path,
    column_map=None,
    tz=None,
    interval=None,
    weather=None,
    site=None,
    construction=None,
    model="auto",
    gains="constant",
    step_s=None,
    progress=False,
    *,
    table=None,
    table_sha256=None,
    ground_c=None,
    ground_share=None,
    method="output_error",
    test_days=None,
    window_areas=None,
):
    """
    Calibrate from files: read, align, add weather and sun, fit, judge against a construction.

    Parameters
    ----------
    log_path : str or os.PathLike
        The log.
    column_map, tz, interval : optional
        As for :func:`prepare_log`.
    weather : str or os.PathLike, optional
        Weather file (TMY3, EPW, CSV).
    site : str or dict, optional
        ``"LAT,LON"`` or a dict with ``latitude`` and ``longitude``.
    construction : str or os.PathLike, optional
        Construction TOML (docs/constructions.md): the result reports how the calibrated UA
        and capacity compare with it, and its windows weight the façades of the solar input.
    model : {'1R1C', '2R2C', '3R2C', '4R3C', 'auto'}
        Preset, or ``auto`` to compare the presets of ``estimate.MODEL_ORDER``.
    gains : {'constant', 'day_night', 'four_period'}
        Model of unlogged internal gains.
    step_s : float, optional
        Model step [s].
    progress : bool
        Show a spinner on stderr while fitting.
    table : pandas.DataFrame, optional
        The log's cells already read (see :func:`thermorc.read.read_log`), e.g. one home's
        rows of a Parquet dataset; ``log_path`` then only names the log in messages and in
        the provenance record.
    table_sha256 : str, optional
        SHA-256 recorded for ``table`` in the provenance; default: :func:`table_digest`.
    ground_c : float, optional
        Constant ground temperature [°C] under floors on the ground (e.g. the annual mean
        outdoor temperature, common practice). The models then lose a share of their heat
        to it, and UA is the total to outdoor and ground (docs/calibration.md).
    ground_share : float, optional
        That share of the heat loss coefficient; default with ``ground_c``: the
        construction's ``ground_floor`` U A over its whole UA.
    method : {'output_error', 'prediction_error'}
        Estimator (see :func:`thermorc.estimate.calibrate`).
    test_days : float, optional
        Keep the last days of the log back: the model is fitted to the rest and the result's
        ``validation`` says how it predicts them (:func:`thermorc.estimate.validate`).
    window_areas : str or dict, optional
        Window area per façade [m²], ``"S=8,E=3,W=3,N=4"`` or ``{"S": 8, "E": 3, ...}``
        (:func:`parse_window_areas`): they weight the façades of the solar input, in place of
        a construction's windows.

    Returns
    -------
    CalibrationResult
    """
    import contextlib

    from thermorc import estimate, quality

    if isinstance(site, str):
        site = parse_site(site)
    built = None
    ua_prior = None
    if construction is not None:
        from thermorc.construction import construction_ua, read_construction
        from thermorc.iso13790 import CONSTRUCTION_UA_REL_UNCERTAINTY

        # Check every input file before the fit, which can take minutes.
        built = read_construction(construction)
        # The construction's UA is a prior with the same uncertainty the plausibility check
        # gives it: measured whole-home heat loss often differs from the design value that much.
        ua_prior = (construction_ua(built)["ua_w_per_k"], CONSTRUCTION_UA_REL_UNCERTAINTY)
    share_note = None
    if ground_c is not None and ground_share is None:
        if built is None:
            raise InputError("--ground-c needs the share of the heat loss that goes to the ground: give "
                             "--ground-share, or a --construction with a ground_floor element", column="ground_share")
        ua = construction_ua(built)
        if ua["ground_ua_w_per_k"] <= 0:
            raise InputError("has no ground_floor element, so it gives no ground share for --ground-c (give "
                             "--ground-share, or mark the floor on the ground as kind = \"ground_floor\")",
                             path=str(construction))
        ground_share = ua["ground_ua_w_per_k"] / ua["ua_w_per_k"]
        share_note = (f"ground share {ground_share:.3f} = the construction's ground-floor U A "
                      f"{ua['ground_ua_w_per_k']:.1f} W/K over its UA {ua['ua_w_per_k']:.1f} W/K")
    estimate._ground_path(ground_c, ground_share)  # checked before the log is read
    check_test_days(test_days)
    weights = weights_from = None
    if window_areas is not None:
        weights = parse_window_areas(window_areas)
        weights_from = "the window areas given"
    elif built is not None:
        from thermorc.construction import window_facade_weights

        weights = window_facade_weights(built)
        weights_from = "the construction's windows"
    prepared = prepare_log(log_path, column_map=column_map, tz=tz, interval=interval, weather_path=weather, site=site,
                           step_s=step_s, table=table, solar_weights=weights, weights_from=weights_from)
    report = quality.inspect_log(prepared.aligned, has_weather=weather is not None)
    if model != "auto":
        quality.require_model(report, model, path=str(log_path))
    solar = SOLAR_COLUMN if SOLAR_COLUMN in prepared.data.columns else "ghi_w_m2"
    data = estimate.calibration_data(prepared.aligned, solar_column=solar, path=str(log_path), ground_c=ground_c,
                                     ground_share=ground_share)
    data.notes.extend(prepared.notes + ([share_note] if share_note else []))
    test_frame = None
    if test_days is not None:
        cut = _test_cut(prepared.data.index, test_days, log_path)
        test_frame = prepared.data.iloc[cut:]
        data = data.subset(cut)
        data.notes.append(f"the last {test_days:g} days ({test_frame.index[0].isoformat()} on) kept back for validation")
    spinner = contextlib.nullcontext()
    if progress:
        from rich.console import Console

        spinner = Console(stderr=True).status("fitting the model", spinner="dots")
    with spinner:
        if model == "auto":
            result = estimate.calibrate_auto(data, gains=gains, path=str(log_path), ua_prior=ua_prior, method=method)
        else:
            result = estimate.calibrate(data, model=model, gains=gains, path=str(log_path), ua_prior=ua_prior,
                                        method=method)
        if test_frame is not None:
            result.extras["validation"] = {"days": float(test_days), **estimate.validate(result, test_frame)}
            result.warnings.extend(result.extras["validation"]["warnings"])
    result.site = {**prepared.site, "tz": str(prepared.data.index.tz)}
    if weights and result.solar_input == SOLAR_COLUMN:
        result.solar_weights = weights
    result.extras["data_quality"] = {"verdict": report.verdict, "supported": list(report.supported)}
    if built is not None:
        from thermorc.iso13790 import plausibility_details

        ua_se = result.std_errors.get("heat_loss_coefficient_w_per_k", float("nan"))
        details = plausibility_details(result.heat_loss_coefficient_w_per_k, result.capacitance_j_per_k, ua_se, built)
        result.extras["plausibility"] = details
        result.warnings.extend(details.get("warnings", []))
    if table is None:
        result.extras["provenance"] = provenance(log=log_path, column_map=column_map, weather=weather,
                                                 construction=construction)
    else:
        result.extras["provenance"] = provenance(column_map=column_map, weather=weather, construction=construction)
        result.extras["provenance"]["inputs"] = {
            "log": {"file": os.path.basename(os.fspath(log_path)), "sha256": table_sha256 or table_digest(table)},
            **result.extras["provenance"]["inputs"],
        }
    return result


def simulate_files(result_path, log_path, column_map=None, tz=None, weather=None, site=None, interval=None):
    """
    Open-loop prediction of a log's indoor temperature from a RESULT.json.

    Parameters
    ----------
    result_path : str or os.PathLike
        RESULT.json from a calibration.
    log_path : str or os.PathLike
        Log with measured heating (and weather, or give ``weather``).
    column_map, tz, weather, site, interval : optional
        As for :func:`prepare_log`.

    Returns
    -------
    frame : pandas.DataFrame
        Index ``time``; ``indoor_c`` (model) [°C], each node ``<node>_c`` [°C] and the
        measured ``indoor_measured_c`` [°C].
    rmse_k : float
        RMSE of the prediction against the measured indoor temperature. [K]
    """
    from thermorc.estimate import extrapolation_warning, log_heating_share, predict
    from thermorc.result import CalibrationResult

    result = CalibrationResult.from_json(result_path)
    if isinstance(site, str):
        site = parse_site(site)
    site = site or ({k: result.site[k] for k in ("latitude", "longitude") if k in result.site} or None)
    prepared = prepare_log(log_path, column_map=column_map, tz=tz, interval=interval, weather_path=weather, site=site,
                           step_s=result.step_s, solar_weights=result.solar_weights or None)
    frame = prepared.data
    pred = predict(result, frame)
    caution = extrapolation_warning(result, log_heating_share(result, frame))
    if caution:
        warnings.warn(caution, FitQualityWarning, stacklevel=2)
    pred["indoor_measured_c"] = frame["indoor_c"]
    pred.index.name = "time"
    err = (frame["indoor_c"] - pred["indoor_c"]).dropna()
    rmse = float(np.sqrt(np.mean(err**2))) if len(err) else float("nan")
    return pred, rmse
