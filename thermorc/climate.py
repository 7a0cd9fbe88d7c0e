"""
Climate summaries of a weather frame: heating degree-days and heating design temperatures.

Inputs are the frames of :func:`thermorc.read.read_weather` (``outdoor_c`` at instants, one
row per hour, local standard time).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from thermorc.errors import InputError

__all__ = ["heating_degree_days", "heating_design_temperatures", "F_TO_K_DAYS"]

#: 1 degF-day = 1/1.8 K-day (NIST SP 811, B.8: a temperature interval of 1 degF is 5/9 K).
F_TO_K_DAYS = 1.0 / 1.8


def _outdoor(weather):
    if "outdoor_c" not in weather:
        raise InputError("weather has no outdoor_c column", column="outdoor_c")
    t = weather["outdoor_c"].dropna()
    if len(t) < 24:
        raise InputError(f"only {len(t)} outdoor temperatures (expected at least one day)", column="outdoor_c")
    return t


def heating_degree_days(weather, base_c=18.333333333333332):
    """
    Heating degree-days by the daily-mean method.

    Each local calendar day's mean outdoor temperature is compared with the base; the shortfall
    is summed.

    Parameters
    ----------
    weather : pandas.DataFrame
        With ``outdoor_c`` [°C] on a tz-aware index.
    base_c : float
        Base temperature [°C]; the default is 65 °F.

    Returns
    -------
    dict
        ``annual_k_day`` and ``annual_f_day`` [K·day, °F·day], ``monthly_k_day`` (a Series by
        month number), ``days`` (number of days averaged).

    References
    ----------
    ASHRAE Handbook - Fundamentals (2017), ch. 14 (degree-days from daily mean temperature;
    from memory). Common practice for U.S. HDD65.
    """
    t = _outdoor(weather)
    daily = t.groupby(t.index.tz_localize(None).normalize()).mean()
    hdd = (base_c - daily).clip(lower=0.0)
    monthly = hdd.groupby(pd.DatetimeIndex(hdd.index).month).sum()
    annual = float(hdd.sum())
    return {"annual_k_day": annual, "annual_f_day": annual * 1.8, "monthly_k_day": monthly,
            "days": int(len(daily))}


def heating_design_temperatures(weather):
    """
    Heating design dry-bulb temperatures from the hourly outdoor temperature.

    The 99.6 % (99 %) value is the temperature that the hourly readings are at or above for
    99.6 % (99 %) of the hours of the year: the reading ranked round(0.004 n) (round(0.01 n))
    from the coldest.

    Parameters
    ----------
    weather : pandas.DataFrame
        With ``outdoor_c`` [°C], hourly.

    Returns
    -------
    dict
        dry_bulb_99_6_c, dry_bulb_99_c [°C], hours (n).

    Notes
    -----
    A typical-year file gives one year; published design values come from 25 or more years of
    records and differ from it. Size heating plant by local code (e.g. ACCA Manual J in the
    USA) with a licensed professional, not by this number alone.

    References
    ----------
    ASHRAE Handbook - Fundamentals (2017), ch. 14, "Climatic design information" (annual
    heating design conditions at 99.6 % and 99 %; from memory).
    """
    t = np.sort(_outdoor(weather).to_numpy(dtype=float))
    n = t.size

    def ranked(p):
        return float(t[max(int(round(p * n)), 1) - 1])

    return {"dry_bulb_99_6_c": ranked(0.004), "dry_bulb_99_c": ranked(0.01), "hours": int(n)}
