"""
Sun on the house: solar position, decomposition and transposition onto façades, via pvlib.

Irradiance columns are means over the interval starting at their stamp, so the sun position
for an interval is computed at its MIDPOINT, not at its label (pvlib's "weather data" guide
warns that datasets label intervals differently and solar position depends on it).
"""

from __future__ import annotations

import warnings
from collections import OrderedDict

import numpy as np
import pandas as pd
import pvlib

from thermorc.errors import DataQualityWarning, InputError

__all__ = ["FACADES", "midpoints", "solar_position", "decompose", "facade_irradiance", "facade_arrays",
           "clear_sky_ghi", "solar_inputs"]

#: Façade name -> (surface tilt [deg], surface azimuth [deg east of north]).
FACADES = {"s": (90.0, 180.0), "e": (90.0, 90.0), "w": (90.0, 270.0), "n": (90.0, 0.0)}
DECOMPOSITIONS = ("erbs", "disc")
TRANSPOSITIONS = ("isotropic", "haydavies", "reindl", "perez")


def _step_s(index):
    if index.freq is not None:
        try:
            return pd.Timedelta(index.freq).total_seconds()
        except (TypeError, ValueError):
            pass
    if len(index) < 2:
        raise InputError("need at least two times to know the interval length")
    return float(np.median(np.diff(index.as_unit("ns").asi8)) / 1e9)


def midpoints(index):
    """
    Midpoints of the intervals that start at each stamp.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        Interval-start labels (tz-aware), uniform or nearly so.

    Returns
    -------
    pandas.DatetimeIndex
    """
    return index + pd.Timedelta(seconds=_step_s(index) / 2.0)


def _check_site(latitude, longitude):
    if not (np.isfinite(latitude) and -90 <= latitude <= 90):
        raise InputError(f"latitude {latitude!r} is outside -90..90 degrees", column="latitude")
    if not (np.isfinite(longitude) and -180 <= longitude <= 180):
        raise InputError(f"longitude {longitude!r} is outside -180..180 degrees", column="longitude")


#: Columns of :func:`pvlib.solarposition.get_solarposition`, in its order.
POSITION_COLUMNS = ("apparent_zenith", "zenith", "apparent_elevation", "elevation", "azimuth", "equation_of_time")

# Sun positions already computed in this process. Homes of a fleet often share a site and a
# time grid, and the solar position algorithm is the dearest step of preparing a log, so each
# (site, grid) is computed once. The key is exact: latitude, longitude and altitude as given,
# and the grid's first instant, step, length and time zone; only uniform grids are kept.
# Entries are read-only arrays; the budget bounds memory (floats kept, 8 bytes each).
_SUN_CACHE = OrderedDict()
_SUN_CACHE_BUDGET = 4_000_000


def _grid_key(index):
    """``(first instant [ns], step [ns], length, tz)`` of a uniform index, else None."""
    ns = index.as_unit("ns").asi8
    if ns.size < 2:
        return None
    step = int(ns[1] - ns[0])
    if step <= 0 or not np.all(np.diff(ns) == step):
        return None
    return int(ns[0]), step, int(ns.size), str(index.tz)


def _sun(index, latitude, longitude, altitude_m):
    """
    pvlib's solar position at the interval midpoints, and their day of year, cached per grid.

    Returns a dict of read-only arrays: the :data:`POSITION_COLUMNS`, ``day_of_year`` and
    ``midpoints`` (the pandas.DatetimeIndex the positions were computed at).
    """
    _check_site(latitude, longitude)
    grid = _grid_key(index)
    key = None
    if grid is not None:
        key = (float(latitude), float(longitude), None if altitude_m is None else float(altitude_m), grid)
        hit = _SUN_CACHE.get(key)
        if hit is not None:
            _SUN_CACHE.move_to_end(key)
            return hit
    mid = midpoints(index)
    pos = pvlib.solarposition.get_solarposition(mid, latitude, longitude, altitude=altitude_m)
    entry = {name: pos[name].to_numpy(dtype=float, copy=True) for name in POSITION_COLUMNS}
    entry["day_of_year"] = mid.day_of_year.to_numpy()
    for value in entry.values():
        value.setflags(write=False)
    entry["midpoints"] = mid
    if key is not None:
        size = len(index) * (len(POSITION_COLUMNS) + 1)
        if size <= _SUN_CACHE_BUDGET:
            _SUN_CACHE[key] = entry
            while sum(len(e["zenith"]) for e in _SUN_CACHE.values()) * (len(POSITION_COLUMNS) + 1) \
                    > _SUN_CACHE_BUDGET:
                _SUN_CACHE.popitem(last=False)
    return entry


def solar_position(index, latitude, longitude, altitude_m=0.0):
    """
    Sun position at the midpoint of each interval.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        Interval-start labels (tz-aware).
    latitude, longitude : float
        Site [deg north, deg east].
    altitude_m : float
        Site elevation [m].

    Returns
    -------
    pandas.DataFrame
        pvlib's columns (apparent_zenith, zenith, azimuth ... [deg]) on ``index``.

    Notes
    -----
    The positions of a uniform grid are computed once per site and grid in a process and
    reused (homes of a fleet often share both); the values are pvlib's either way.

    References
    ----------
    Reda, I. and Andreas, A. (2004), "Solar position algorithm for solar radiation
    applications", Solar Energy 76(5), 577-589 (NREL SPA, ``method='nrel_numpy'``).
    """
    sun = _sun(index, latitude, longitude, altitude_m)
    return pd.DataFrame({name: sun[name].copy() for name in POSITION_COLUMNS}, index=index)


def decompose(ghi, zenith, index, model="erbs", *, day_of_year=None):
    """
    Split global horizontal irradiance into direct normal and diffuse horizontal parts.

    Parameters
    ----------
    ghi : array_like
        Global horizontal irradiance [W m-2].
    zenith : array_like
        True solar zenith at the interval midpoints [deg].
    index : pandas.DatetimeIndex
        Interval-start labels (for the day of year).
    model : {'erbs', 'disc'}
    day_of_year : array_like of int, optional
        Day of year of the interval midpoints, when already known (saves working it out
        from ``index``).

    Returns
    -------
    pandas.DataFrame
        dni, dhi [W m-2].

    References
    ----------
    Erbs, D. G., Klein, S. A. and Duffie, J. A. (1982), Solar Energy 28(4), 293-302.
    Maxwell, E. L. (1987), "A quasi-physical model for converting hourly global horizontal to
    direct normal insolation", SERI/TR-215-3087 (DISC).
    """
    dni, dhi = _decompose(ghi, zenith, index, model, day_of_year)
    return pd.DataFrame({"dni": dni, "dhi": dhi}, index=index)


def _decompose(ghi, zenith, index, model, day_of_year=None):
    ghi = np.asarray(ghi, dtype=float)
    zen = np.asarray(zenith, dtype=float)
    if ghi.shape != (len(index),) or zen.shape != (len(index),):
        raise ValueError(f"ghi and zenith need one value per time ({len(index)}), not {ghi.shape} and {zen.shape}")
    doy = midpoints(index).day_of_year.to_numpy() if day_of_year is None else np.asarray(day_of_year)
    if model == "erbs":
        parts = pvlib.irradiance.erbs(ghi, zen, doy)
        dni, dhi = np.asarray(parts["dni"]), np.asarray(parts["dhi"])
    elif model == "disc":
        parts = pvlib.irradiance.disc(ghi, zen, doy)
        dni = np.asarray(parts["dni"])
        dhi = ghi - dni * np.cos(np.radians(zen))
    else:
        raise InputError(f"unknown decomposition {model!r} (expected one of {', '.join(DECOMPOSITIONS)})")
    dni = np.where(np.isnan(ghi), np.nan, np.nan_to_num(dni))
    dhi = np.clip(dhi, 0.0, None)
    return dni, dhi


def facade_irradiance(weather, latitude, longitude, altitude_m=0.0, albedo=0.2, model="isotropic",
                      decomposition="erbs"):
    """
    Irradiance on vertical façades facing S, E, W, N and on the horizontal.

    Parameters
    ----------
    weather : pandas.DataFrame
        ``ghi_w_m2`` and optionally ``dni_w_m2``, ``dhi_w_m2`` [W m-2], interval means on
        interval-start labels (tz-aware). Without dni/dhi, GHI is decomposed.
    latitude, longitude : float
        Site [deg north, deg east].
    altitude_m : float
        Site elevation [m].
    albedo : float
        Ground reflectance [-] (0.2 is common practice for grass; the TMY3 albedo column of
        some files is zero and is not used).
    model : {'isotropic', 'haydavies', 'reindl', 'perez'}
        Sky-diffuse transposition model of :func:`pvlib.irradiance.get_total_irradiance`.
    decomposition : {'erbs', 'disc'}
        Used only when dni/dhi are absent.

    Returns
    -------
    pandas.DataFrame
        poa_s_w_m2, poa_e_w_m2, poa_w_w_m2, poa_n_w_m2, poa_h_w_m2 [W m-2] on the same index
        (poa_h_w_m2 is GHI).

    References
    ----------
    Liu, B. Y. H. and Jordan, R. C. (1963), Solar Energy 7(2), 53-74 (isotropic sky);
    Hay, J. E. and Davies, J. A. (1980); Perez, R. et al. (1990), Solar Energy 44(5), 271-289;
    pvlib: Holmgren, W. F., Hansen, C. W. and Mikofski, M. A. (2018), JOSS 3(29), 884.
    """
    if "ghi_w_m2" not in weather:
        raise InputError("weather has no ghi_w_m2 column (expected global horizontal irradiance)",
                         column="ghi_w_m2")
    both = "dni_w_m2" in weather and "dhi_w_m2" in weather
    out = facade_arrays(
        weather["ghi_w_m2"].to_numpy(dtype=float), weather.index, latitude, longitude, altitude_m,
        dni=weather["dni_w_m2"].to_numpy(dtype=float) if both else None,
        dhi=weather["dhi_w_m2"].to_numpy(dtype=float) if both else None,
        albedo=albedo, model=model, decomposition=decomposition,
    )
    return pd.DataFrame(out, index=weather.index)


def facade_arrays(ghi, index, latitude, longitude, altitude_m=0.0, dni=None, dhi=None, albedo=0.2,
                  model="isotropic", decomposition="erbs"):
    """
    :func:`facade_irradiance` on arrays: the same values, without building a table.

    Parameters
    ----------
    ghi : numpy.ndarray
        Global horizontal irradiance, interval means [W m-2]; NaN where missing.
    index : pandas.DatetimeIndex
        Interval-start labels of ``ghi`` (tz-aware).
    latitude, longitude : float
        Site [deg north, deg east].
    altitude_m : float
        Site elevation [m].
    dni, dhi : numpy.ndarray, optional
        Direct normal and diffuse horizontal irradiance [W m-2]; both or neither. Without
        them, GHI is decomposed.
    albedo, model, decomposition
        As for :func:`facade_irradiance`.

    Returns
    -------
    dict of numpy.ndarray
        poa_s_w_m2, poa_e_w_m2, poa_w_w_m2, poa_n_w_m2, poa_h_w_m2 [W m-2]; NaN where ``ghi``
        is NaN.

    References
    ----------
    As for :func:`facade_irradiance`.
    """
    if model not in TRANSPOSITIONS:
        raise InputError(f"unknown transposition model {model!r} (expected one of {', '.join(TRANSPOSITIONS)})")
    if not (0.0 <= albedo <= 1.0):
        raise InputError(f"albedo {albedo!r} is outside 0..1", column="albedo")
    sun = _sun(index, latitude, longitude, altitude_m)
    raw = np.asarray(ghi, dtype=float)
    ghi = raw.clip(0.0, None)
    if dni is not None and dhi is not None:
        dni = np.asarray(dni, dtype=float).clip(0.0, None)
        dhi = np.asarray(dhi, dtype=float).clip(0.0, None)
    else:
        dni, dhi = _decompose(ghi, sun["zenith"], index, decomposition, sun["day_of_year"])
    kwargs = {}
    if model in ("haydavies", "reindl", "perez"):
        kwargs["dni_extra"] = pvlib.irradiance.get_extra_radiation(sun["midpoints"]).to_numpy()
    if model == "perez":
        kwargs["airmass"] = pvlib.atmosphere.get_relative_airmass(sun["apparent_zenith"])
    missing = np.isnan(raw)
    out = {}
    for name, (tilt, azimuth) in FACADES.items():
        total = pvlib.irradiance.get_total_irradiance(
            tilt, azimuth, sun["apparent_zenith"], sun["azimuth"], dni, ghi, dhi,
            albedo=albedo, model=model, **kwargs,
        )
        poa = np.nan_to_num(np.asarray(total["poa_global"], dtype=float), nan=0.0)
        out[f"poa_{name}_w_m2"] = np.where(missing, np.nan, poa)
    out["poa_h_w_m2"] = np.where(missing, np.nan, ghi)
    return out


def clear_sky_ghi(index, latitude, longitude, altitude_m=0.0):
    """
    Clear-sky global horizontal irradiance, mean over each interval (at its midpoint).

    Parameters
    ----------
    index : pandas.DatetimeIndex
        Interval-start labels (tz-aware).
    latitude, longitude : float
        Site [deg].
    altitude_m : float
        Site elevation [m].

    Returns
    -------
    pandas.Series
        ghi_w_m2 [W m-2] on ``index``.

    References
    ----------
    Ineichen, P. and Perez, R. (2002), "A new airmass independent formulation for the Linke
    turbidity coefficient", Solar Energy 73(3), 151-157 (pvlib ``get_clearsky`` default).
    """
    _check_site(latitude, longitude)
    site = pvlib.location.Location(latitude, longitude, tz="UTC", altitude=altitude_m)
    # The same call as get_clearsky makes without a position (pvlib.location.Location
    # .get_solarposition: pressure from the altitude, 12 degC), shared with the façades.
    sun = _sun(index, latitude, longitude, altitude_m)
    position = pd.DataFrame({name: sun[name] for name in POSITION_COLUMNS}, index=sun["midpoints"])
    sky = site.get_clearsky(sun["midpoints"], solar_position=position)
    return pd.Series(sky["ghi"].to_numpy(), index=index, name="ghi_w_m2")


def solar_inputs(log, latitude, longitude, altitude_m=0.0, weather=None, albedo=0.2, model="isotropic"):
    """
    Façade irradiance for a log: from its own GHI, else a weather frame, else clear sky.

    Parameters
    ----------
    log : pandas.DataFrame
        Model-grid data; ``ghi_w_m2`` is used when present.
    latitude, longitude, altitude_m : float
        Site.
    weather : pandas.DataFrame, optional
        Weather already on the log's index (:func:`thermorc.align.align_weather`).
    albedo : float
    model : str
        See :func:`facade_irradiance`.

    Returns
    -------
    pandas.DataFrame
        Columns of :func:`facade_irradiance`.

    Warns
    -----
    DataQualityWarning
        When the clear-sky model stands in for measured irradiance (it overstates the sun on
        cloudy days, so solar gains come out too high).
    """
    if "ghi_w_m2" in log and log["ghi_w_m2"].notna().any():
        source = log
    elif weather is not None and "ghi_w_m2" in weather:
        source = weather
    else:
        warnings.warn(
            "no measured irradiance in the log or weather: using pvlib's clear-sky model, which "
            "overstates the sun on cloudy days (solar gains will be too high)",
            DataQualityWarning, stacklevel=2,
        )
        source = clear_sky_ghi(log.index, latitude, longitude, altitude_m).to_frame()
    return facade_irradiance(source, latitude, longitude, altitude_m, albedo=albedo, model=model)
