"""
Unit conversions at the input edge: everything inside thermorc is SI.

Temperatures stay in degrees Celsius in columns named ``*_c`` (a kelvin difference equals a
degree-Celsius difference); powers become watts; runtimes become a fraction of the interval.

References
----------
.. [1] Thompson, A. and Taylor, B. N. (2008), "Guide for the Use of the International System
   of Units (SI)", NIST Special Publication 811, Appendix B.8 and B.9 (conversion factors).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "W_PER_BTU_IT_PER_H",
    "TEMPERATURE_UNITS",
    "POWER_UNITS",
    "RUNTIME_UNITS",
    "to_celsius",
    "power_factor_w",
    "runtime_to_fraction",
]

# NIST SP 811 (2008), Appendix B.9, "British thermal unit_IT per hour (Btu_IT/h): watt (W)
# 2.930 711 E-01".
W_PER_BTU_IT_PER_H = 0.29307107

POWER_UNITS = {
    "W": 1.0,
    "kW": 1000.0,
    "MW": 1.0e6,
    "Btu/h": W_PER_BTU_IT_PER_H,
    "kBtu/h": 1000.0 * W_PER_BTU_IT_PER_H,
    # A "ton" of refrigeration is 12 000 Btu_IT/h (NIST SP 811, B.9: 3.516 853 E+03 W).
    "ton": 12000.0 * W_PER_BTU_IT_PER_H,
}

TEMPERATURE_UNITS = ("degC", "degF", "K")

# Runtime per interval: seconds, minutes, a fraction 0..1, or percent 0..100.
RUNTIME_UNITS = ("s", "min", "fraction", "percent")

_ALIASES = {
    "c": "degC", "degc": "degC", "°c": "degC", "celsius": "degC",
    "f": "degF", "degf": "degF", "°f": "degF", "fahrenheit": "degF",
    "k": "K", "kelvin": "K",
    "w": "W", "kw": "kW", "mw": "MW", "btu/h": "Btu/h", "btuh": "Btu/h", "btu/hr": "Btu/h",
    "kbtu/h": "kBtu/h", "kbtuh": "kBtu/h", "mbh": "kBtu/h", "ton": "ton", "tons": "ton",
    "s": "s", "sec": "s", "seconds": "s", "min": "min", "minutes": "min",
    "fraction": "fraction", "percent": "percent", "%": "percent",
}


def canonical_unit(name, allowed):
    """
    Return the canonical spelling of a unit name, or None when it is not in ``allowed``.

    Parameters
    ----------
    name : str
        Unit as written by a user ("F", "degF", "kbtu/h" ...).
    allowed : iterable of str
        Canonical names accepted here.

    Returns
    -------
    str or None
    """
    key = str(name).strip()
    canon = _ALIASES.get(key.lower(), key)
    return canon if canon in tuple(allowed) else None


def to_celsius(values, unit):
    """
    Convert temperatures to degrees Celsius.

    Parameters
    ----------
    values : array_like
        Temperatures in ``unit``.
    unit : {'degC', 'degF', 'K'}
        Unit of ``values``.

    Returns
    -------
    numpy.ndarray or same kind as ``values``
        Temperatures [°C].

    References
    ----------
    NIST SP 811 (2008), B.8: t/°C = (t/°F − 32)/1.8 and t/°C = T/K − 273.15.
    """
    if unit == "degC":
        return values
    if unit == "degF":
        return (values - 32.0) / 1.8
    if unit == "K":
        return values - 273.15
    raise ValueError(f"unknown temperature unit {unit!r} (expected one of {TEMPERATURE_UNITS})")


def power_factor_w(unit):
    """
    Factor that turns a power in ``unit`` into watts.

    Parameters
    ----------
    unit : str
        One of :data:`POWER_UNITS`.

    Returns
    -------
    float
        Watts per ``unit`` [W per unit].
    """
    try:
        return POWER_UNITS[unit]
    except KeyError:
        raise ValueError(f"unknown power unit {unit!r} (expected one of {tuple(POWER_UNITS)})") from None


def runtime_to_fraction(values, unit, interval_s):
    """
    Turn an HVAC runtime per interval into the fraction of the interval the equipment ran.

    Parameters
    ----------
    values : array_like
        Runtime in ``unit``.
    unit : {'s', 'min', 'fraction', 'percent'}
        Unit of ``values``.
    interval_s : float or array_like
        Length of each interval [s] (used for 's' and 'min').

    Returns
    -------
    numpy.ndarray
        Fraction of the interval in operation [-], not clipped.
    """
    values = np.asarray(values, dtype=float)
    if unit == "s":
        return values / np.asarray(interval_s, dtype=float)
    if unit == "min":
        return 60.0 * values / np.asarray(interval_s, dtype=float)
    if unit == "fraction":
        return values
    if unit == "percent":
        return values / 100.0
    raise ValueError(f"unknown runtime unit {unit!r} (expected one of {RUNTIME_UNITS})")
