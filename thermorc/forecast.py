r"""
Heating demand of a calibrated home under a weather file: energy, peak, comfort, uncertainty.

A forecast runs the calibrated RC network (:meth:`CalibrationResult.network`) through one
weather file on a uniform model grid, with solar gains through the calibrated aperture (which
multiplies global horizontal irradiance), the calibrated internal gains, and one of three
heaters:

* ``'ideal'``: exactly the heat that brings the indoor node to the setpoint at the end of each
  interval (:func:`thermorc.simulate.hold_setpoint`);
* ``'capacity'``: the same, clipped at the heater's output; the missing heat is the shortfall;
* ``'thermostat'``: an on/off heater at full output with a switching differential (deadband)
  around the setpoint, sampled once per model step; on-cycles are counted.

The summary holds the annual and monthly energy, the peak, unmet hours, the steady-state
design-condition load at the weather file's own 99.6 % and 99 % heating dry-bulb, a
degree-hour cross-check, and Monte Carlo percentiles from the calibration's covariance.
Every number is an estimate from a model: see the cautions that come with it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.align import align_weather
from thermorc.climate import heating_degree_days, heating_design_temperatures
from thermorc.errors import InputError
from thermorc.network import HEATING, INTERNAL, OUTDOOR, SOLAR
from thermorc.schedule import Schedule, occupied_mask, setpoint_series
from thermorc.simulate import discretise, hold_setpoint, simulate

__all__ = [
    "ForecastResult",
    "HEATERS",
    "UNMET_TOLERANCE_K",
    "DEFAULT_DEADBAND_K",
    "model_inputs",
    "run_heater",
    "step_rise_k",
    "thermostat_caution",
    "warm_start",
    "thermostat",
    "forecast",
    "design_loads",
    "degree_hour_check",
    "energy_by_month",
    "hourly_means",
    "comfort_metrics",
    "CAUTIONS",
]

HEATERS = ("ideal", "capacity", "thermostat")

#: Indoor below the setpoint by more than this counts as unmet (common practice; our default). [K]
UNMET_TOLERANCE_K = 0.5

#: Switching differential of the on/off thermostat: on below setpoint - 0.25 K, off above
#: setpoint + 0.25 K, about the 1 degF swing of a residential thermostat (common practice). [K]
DEFAULT_DEADBAND_K = 0.5

#: WHO Housing and Health Guidelines (2018): 18 degC as a safe, well-balanced indoor
#: temperature to protect the health of general populations in cold seasons.
WHO_MIN_INDOOR_C = 18.0

#: Keep a home above about this temperature so water pipes do not freeze (common practice). [degC]
PIPE_MIN_INDOOR_C = 10.0

CAUTIONS = {
    "design": (
        "Peak and design-condition loads are estimates from a calibrated model; they are no "
        "substitute for a design load calculation by a licensed professional under local codes "
        "(for example ACCA Manual J in the USA)."
    ),
    "design_gains": (
        "Design-condition loads are steady state, UA x (setpoint - design dry-bulb), with solar and "
        "internal gains ignored (common practice for heating design)."
    ),
    "typical_year": (
        "A typical-year weather file is not a forecast of a particular winter: real years are colder "
        "or warmer, and published design temperatures come from 25 or more years of records."
    ),
    "heat_pump": (
        "A heat pump may bring on auxiliary resistance heat while it recovers from a setback, which "
        "raises the peak and can cancel the savings; check the controls (slow recovery, outdoor lockout)."
    ),
    "ideal_peak": (
        "The ideal heater recovers from a setback within one model step, so its peak grows as the "
        "step shrinks; give a heater capacity for a realistic recovery peak."
    ),
    "who": (
        "Occupied indoor temperature falls below 18 degC, the minimum the WHO Housing and Health "
        "Guidelines (2018) recommend in cold seasons; older, very young and sick people need more warmth."
    ),
    "pipes": (
        "Indoor temperature falls below 10 degC: water pipes in outside walls, crawl spaces and "
        "unheated rooms are at risk of freezing (common practice: keep the home above about 10 degC)."
    ),
}


@dataclass
class ForecastResult:
    """
    What a forecast found.

    Attributes
    ----------
    frame : pandas.DataFrame
        One row per model interval (tz-aware index ``time``, interval-beginning): ``indoor_c``
        at the stamp and ``indoor_mean_c`` over the interval [°C], ``setpoint_c`` [°C],
        ``heating_w`` and ``shortfall_w`` (means over the interval) [W], ``outdoor_c`` [°C],
        ``ghi_w_m2`` [W m⁻²], ``internal_w`` [W], and ``heater_on`` for the thermostat.
    summary : dict
        Key figures (see :func:`forecast`); what SUMMARY.json holds.
    cautions : list of str
        Plain-words cautions that apply to this forecast.
    simulation : SimulationResult
        The run itself.
    """

    frame: pd.DataFrame
    summary: dict
    cautions: list = field(default_factory=list)
    simulation: object = None

    def __repr__(self):
        s = self.summary
        return (f"ForecastResult(rows={len(self.frame)}, heating_kwh={s.get('heating_kwh', math.nan):.0f}, "
                f"peak_heating_w={s.get('peak_heating_w', math.nan):.0f}, cautions={len(self.cautions)})")


# -- inputs ---------------------------------------------------------------------------------
def model_inputs(result, weather, step_s=300.0, parameters=None):
    """
    Model inputs on a uniform grid from a weather frame and a calibration.

    Parameters
    ----------
    result : CalibrationResult
        Supplies the internal-gain model and which irradiance the aperture multiplies.
    weather : pandas.DataFrame
        From :func:`thermorc.read.read_weather`: ``outdoor_c`` at instants [°C] and
        ``ghi_w_m2`` as hourly interval means [W m⁻²], tz-aware interval-beginning index.
    step_s : float
        Model step; must divide one hour. [s]
    parameters : dict, optional
        Replacement parameters (a Monte Carlo draw) for the internal gains.

    Returns
    -------
    pandas.DataFrame
        ``outdoor_c``, ``heating_w`` (zeros), ``solar_w_m2``, ``internal_w`` (and ``ground_c``
        for a result with a ground path) on the grid that covers the weather file, last hour
        included.
    """
    step = _check_step(step_s)
    if not isinstance(weather, pd.DataFrame) or not isinstance(weather.index, pd.DatetimeIndex):
        raise InputError("weather must be a DataFrame with a DatetimeIndex (use thermorc.read.read_weather)")
    if weather.index.tz is None:
        raise InputError("weather times need a time zone", column="time")
    irradiance = result.solar_input if result.solar_input in weather.columns else None
    if irradiance is None and "ghi_w_m2" in weather.columns:
        from thermorc.chain import SOLAR_COLUMN, vertical_irradiance

        if result.solar_input == SOLAR_COLUMN:
            # The calibration's solar input is façade irradiance: make it from this weather.
            site = result.site or {}
            if "latitude" not in site or "longitude" not in site:
                raise InputError(
                    "the calibration result has no site, which its solar input needs (calibrate with --site or "
                    "a weather file)", column="site",
                )
            weather = weather.assign(**{SOLAR_COLUMN: vertical_irradiance(weather, site, weather,
                                                                          weights=result.solar_weights or None)})
            irradiance = SOLAR_COLUMN
    for col in ("outdoor_c", irradiance or result.solar_input):
        if col not in weather.columns:
            raise InputError(f"weather has no {col} column (found {list(weather.columns)})", column=col)
    w = weather.sort_index()
    w_step = float(np.median(np.diff(w.index.as_unit("ns").asi8)) / 1e9)
    end = w.index[-1] + pd.Timedelta(seconds=w_step)
    n = int(round((end - w.index[0]).total_seconds() / step))
    index = pd.date_range(w.index[0], periods=n, freq=pd.Timedelta(seconds=step), name="time")
    grid = align_weather(w[["outdoor_c", irradiance]], index)
    for col in grid.columns:
        bad = grid[col].isna()
        if bad.any():
            raise InputError(f"weather has a hole near {index[bad.to_numpy().argmax()].isoformat()} "
                             "(expected a complete weather file)", column=col)
    gains = result.internal_gains_w(index, parameters)
    return pd.DataFrame({
        OUTDOOR: grid["outdoor_c"].to_numpy(),
        HEATING: 0.0,
        SOLAR: grid[irradiance].to_numpy(),
        INTERNAL: gains.to_numpy(),
        **{name: series.to_numpy() for name, series in result.boundary_inputs(index).items()},
    }, index=index)


def _check_step(step_s):
    try:
        step = float(step_s)
    except (TypeError, ValueError):
        raise InputError(f"step_s is {step_s!r} (expected seconds)") from None
    if not (math.isfinite(step) and 10.0 <= step <= 3600.0) or abs(3600.0 / step - round(3600.0 / step)) > 1e-9:
        raise InputError(f"model step {step_s!r} s does not divide one hour (expected 10 to 3600 s, e.g. 300)")
    return step


# -- heaters --------------------------------------------------------------------------------
def _step_matrices(space, dt_s):
    """One-step matrices: FOH for boundary temperatures, ZOH for heat inputs (interval means)."""
    ad, b0, b1 = discretise(space.a, space.b, dt_s, "foh")
    _, b0z, _ = discretise(space.a, space.b, dt_s, "zoh")
    nb = space.n_boundaries
    b0 = np.concatenate([b0[:, :nb], b0z[:, nb:]], axis=1)
    b1 = np.concatenate([b1[:, :nb], np.zeros_like(b1[:, nb:])], axis=1)
    return ad, b0, b1


def _drive_loop(u_ext, b0, b1):
    """``u_ext[:-1] @ b0.T + u_ext[1:] @ b1.T`` as a plain loop."""
    n_rows = u_ext.shape[0] - 1
    n, m = b0.shape
    out = np.empty((n_rows, n))
    for k in range(n_rows):
        for i in range(n):
            acc = 0.0
            for j in range(m):
                acc += b0[i, j] * u_ext[k, j] + b1[i, j] * u_ext[k + 1, j]
            out[k, i] = acc
    return out


def step_drive(u, b0, b1):
    """
    Weather and gains term of each step: ``b0 u[k] + b1 u[k+1]`` (the last row held).

    Parameters
    ----------
    u : numpy.ndarray, shape (N, m)
        Inputs at the stamps, the heater channel zeroed.
    b0, b1 : numpy.ndarray, shape (n, m)
        One-step input matrices (:func:`thermorc.simulate.discretise`).

    Returns
    -------
    numpy.ndarray, shape (N, n)

    Notes
    -----
    A compiled loop rather than a matrix product: for a tall, thin product such as this
    (10^5 x 4 by 4 x 2) a multi-threaded BLAS can spend far longer starting and waiting for its
    threads than on the arithmetic when the machine's cores are busy.
    """
    u_ext = np.ascontiguousarray(np.vstack([u, u[-1:]]), dtype=float)
    return _drive(u_ext, np.ascontiguousarray(b0, dtype=float), np.ascontiguousarray(b1, dtype=float))


def _thermostat_loop(ad, drive, bq, sp, x, si, cap, half_band, heat, on_out):
    """On/off heater sampled at each stamp; returns the number of off -> on switches."""
    n = x.shape[0]
    xn = np.empty(n)
    on = x[si] < sp[0]
    cycles = 1 if on else 0
    for k in range(drive.shape[0]):
        t = x[si]
        if t < sp[k] - half_band:
            if not on:
                cycles += 1
            on = True
        elif t > sp[k] + half_band:
            on = False
        q = cap if on else 0.0
        heat[k] = q
        on_out[k] = on
        for i in range(n):
            acc = drive[k, i] + bq[i] * q
            for j in range(n):
                acc += ad[i, j] * x[j]
            xn[i] = acc
        for i in range(n):
            x[i] = xn[i]
    return cycles


try:  # numba compiles the loops; without it the same code runs, slowly, as Python.
    import numba

    _thermostat_loop = numba.njit(cache=True)(_thermostat_loop)
    _drive = numba.njit(cache=True)(_drive_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    def _drive(u_ext, b0, b1):
        return u_ext[:-1] @ b0.T + u_ext[1:] @ b1.T


def thermostat(network, inputs, setpoint_c, capacity_w, deadband_k=DEFAULT_DEADBAND_K, x0=None,
               node="indoor", channel=HEATING):
    """
    On/off heater with a switching differential, sampled once per step.

    At each stamp the heater switches on when the node is below ``setpoint - deadband/2`` and
    off when it is above ``setpoint + deadband/2``, and keeps its state in between; while on it
    delivers ``capacity_w`` for the whole interval.

    Parameters
    ----------
    network : Network
        RC network with a capacitive ``node``.
    inputs : pandas.DataFrame
        As for :func:`thermorc.simulate.simulate`, uniform step; ``channel`` is ignored.
    setpoint_c : array_like, shape (N,)
        Setpoint at each stamp. [°C]
    capacity_w : float
        Heater output while on. [W]
    deadband_k : float
        Width of the switching differential. [K]
    x0 : array_like, optional
        Initial capacitive-node temperatures [°C]; default: steady state at the first setpoint.
    node, channel : str
        Controlled node and the heat input channel the heater drives.

    Returns
    -------
    sim : SimulationResult
        With the heating in ``inputs[channel]`` [W].
    on : numpy.ndarray of bool
        Heater state in each interval.
    cycles : int
        Number of on-cycles (off -> on switches, a start counted when on at first).

    Notes
    -----
    The sampled thermostat overshoots its band by up to one step's temperature change, as a
    real one does by its own response time. The temperatures are recomputed by
    :func:`thermorc.simulate.simulate` from the heating found, with exact interval means.
    """
    if capacity_w is None or not float(capacity_w) > 0:
        raise InputError(f"an on/off thermostat needs a heater capacity > 0 W (got {capacity_w!r})",
                         column="capacity_w")
    # 20 K is far wider than any thermostat's differential (common practice); it catches inf.
    if not 0 <= float(deadband_k) <= 20:
        raise InputError(f"deadband is {deadband_k!r} K (expected 0 to 20 K)", column="deadband_k")
    space = network.state_space()
    frame = inputs.assign(**{channel: 0.0})
    u = frame[list(space.inputs)].to_numpy(dtype=float)
    dt = _step_of(frame)
    sp = np.broadcast_to(np.asarray(setpoint_c, dtype=float), (len(u),)).copy()
    ad, b0, b1 = _step_matrices(space, dt)
    ci = list(space.inputs).index(channel)
    si = list(space.states).index(node)
    if x0 is None:
        x0 = hold_setpoint(network, frame.iloc[:2], sp[:2]).temperatures_c[list(space.states)].to_numpy()[0]
    x = np.array(x0, dtype=float)
    drive = step_drive(u, b0, b1)
    heat = np.zeros(len(u))
    on = np.zeros(len(u), dtype=np.bool_)
    cycles = _thermostat_loop(np.ascontiguousarray(ad), drive, np.ascontiguousarray(b0[:, ci]), sp, x,
                              int(si), float(capacity_w), 0.5 * float(deadband_k), heat, on)
    frame[channel] = heat
    sim = simulate(network, frame, x0=np.asarray(x0, dtype=float))
    return sim, on, int(cycles)


def step_rise_k(network, capacity_w, step_s, node="indoor", channel=HEATING):
    """
    Rise of the controlled node over one step at full heater output (other inputs zero).

    Parameters
    ----------
    network : Network
    capacity_w : float
        Heater output. [W]
    step_s : float
        Model step. [s]
    node, channel : str
        Controlled node and heater channel.

    Returns
    -------
    float
        Temperature rise. [K]
    """
    space = network.state_space()
    _, b0, _ = _step_matrices(space, step_s)
    return float(capacity_w * b0[list(space.states).index(node), list(space.inputs).index(channel)])


def thermostat_caution(network, capacity_w, step_s, deadband_k):
    """
    A caution when one step at full output moves the indoor node by more than the deadband.

    Parameters
    ----------
    network : Network
    capacity_w : float
        Heater output. [W]
    step_s : float
        Model step. [s]
    deadband_k : float
        Thermostat switching differential. [K]

    Returns
    -------
    str or None
        The caution, or ``None`` when the step is short enough.
    """
    rise = step_rise_k(network, capacity_w, step_s)
    if rise <= deadband_k:
        return None
    return (f"At full output the indoor temperature moves {rise:.2f} K in one {step_s:g} s step, more than the "
            f"{deadband_k:g} K deadband, so the sampled thermostat overshoots its band; use a shorter step "
            "(e.g. --step-s 60) for cycle counts and comfort figures.")


def run_heater(network, inputs, setpoint_c, heater="ideal", capacity_w=None, deadband_k=DEFAULT_DEADBAND_K,
               warmup=True, x0=None):
    """
    Run one heater through the inputs, starting from a warmed-up state.

    Parameters
    ----------
    network : Network
    inputs : pandas.DataFrame
        From :func:`model_inputs`.
    setpoint_c : array_like, shape (N,)
        Setpoint at each stamp. [°C]
    heater : {'ideal', 'capacity', 'thermostat'}
        See the module docstring.
    capacity_w : float, optional
        Heater output limit (``'capacity'``) or output while on (``'thermostat'``). [W]
    deadband_k : float
        Switching differential of the thermostat. [K]
    warmup : bool
        When the inputs span a whole year (a typical year wraps), start from the state the
        last weeks of the year leave, not from a steady state.
    x0 : array_like, optional
        Start state [°C]; when given, no warm-up is run.

    Returns
    -------
    sim : SimulationResult
    extra : dict
        ``heater_on`` (array or None), ``cycles`` (int or None), ``warmed_up`` (bool).
    """
    heater = _check_heater(heater, capacity_w)
    sp = np.asarray(setpoint_c, dtype=float)
    warmed = x0 is not None
    if x0 is None and warmup:
        x0 = warm_start(network, inputs, sp, heater, capacity_w, deadband_k)
        warmed = x0 is not None
    sim, on, cycles = _run(network, inputs, sp, heater, capacity_w, deadband_k, x0)
    return sim, {"heater_on": on, "cycles": cycles, "warmed_up": warmed}


def warm_start(network, inputs, setpoint_c, heater="ideal", capacity_w=None, deadband_k=DEFAULT_DEADBAND_K):
    """
    Start state of a whole-year run: the state the last weeks of the year leave.

    A typical year wraps (31 December is followed by 1 January), so running the heater through
    the last three slow time constants of the year (7 to 60 days) gives the state at the
    first stamp, under 5 % (exp(-3)) of the arbitrary steady start left.

    Parameters
    ----------
    network : Network
    inputs : pandas.DataFrame
        From :func:`model_inputs`.
    setpoint_c : array_like, shape (N,)
        Setpoint at each stamp. [°C]
    heater, capacity_w, deadband_k
        As for :func:`run_heater`.

    Returns
    -------
    numpy.ndarray or None
        Capacitive-node temperatures [°C], or ``None`` when the inputs span less than 360 days.
    """
    heater = _check_heater(heater, capacity_w)
    span_days = (inputs.index[-1] - inputs.index[0]).total_seconds() / 86400.0
    if span_days < 360:
        return None
    sp = np.asarray(setpoint_c, dtype=float)
    tau_h = float(network.time_constants_s()[0] / 3600.0)
    days = min(60.0, max(7.0, 3.0 * tau_h / 24.0))
    rows = min(len(inputs) - 1, int(days * 86400.0 / _step_of(inputs)))
    return _run(network, inputs.iloc[-rows:], sp[-rows:], heater, capacity_w, deadband_k, None)[0].final_state_c


def _step_of(frame):
    return float(np.median(np.diff(frame.index.as_unit("ns").asi8)) / 1e9)


def _check_heater(heater, capacity_w):
    if heater is None:
        heater = "ideal" if capacity_w is None else "capacity"
    heater = str(getattr(heater, "value", heater)).lower()
    if heater not in HEATERS:
        raise InputError(f"heater is {heater!r} (expected one of {', '.join(HEATERS)})", column="heater")
    if heater in ("capacity", "thermostat"):
        if capacity_w is None or not (math.isfinite(float(capacity_w)) and float(capacity_w) > 0):
            raise InputError(f"heater '{heater}' needs a capacity > 0 W (got {capacity_w!r})", column="capacity_w")
    elif capacity_w is not None:
        raise InputError("a capacity was given for the ideal heater (expected heater 'capacity' or 'thermostat')",
                         column="capacity_w")
    return heater


def _run(network, inputs, sp, heater, capacity_w, deadband_k, x0):
    if heater == "thermostat":
        return thermostat(network, inputs, sp, capacity_w, deadband_k, x0=x0)
    cap = capacity_w if heater == "capacity" else None
    return hold_setpoint(network, inputs, sp, capacity_w=cap, x0=x0), None, None


# -- figures --------------------------------------------------------------------------------
def energy_by_month(heating_w, step_s):
    """
    Heating energy per calendar month of the index's own clock.

    Parameters
    ----------
    heating_w : pandas.Series
        Mean heating power over each interval. [W]
    step_s : float
        Interval length. [s]

    Returns
    -------
    dict
        ``"YYYY-MM"`` -> energy [kWh].
    """
    kwh = heating_w * (step_s / 3.6e6)
    local = heating_w.index.tz_localize(None) if heating_w.index.tz is not None else heating_w.index
    # Integer year*100 + month groups are much faster than formatting every stamp.
    groups = kwh.groupby(np.asarray(local.year * 100 + local.month)).sum()
    return {f"{k // 100:04d}-{k % 100:02d}": float(v) for k, v in groups.items()}


def comfort_metrics(indoor_c, setpoint_c, step_s, tolerance_k=UNMET_TOLERANCE_K):
    """
    Unmet hours and comfort degree-hours against a setpoint.

    Parameters
    ----------
    indoor_c : array_like
        Indoor temperature at each stamp. [°C]
    setpoint_c : array_like
        Setpoint at each stamp (the heaters aim at it by that stamp). [°C]
    step_s : float
        Interval length. [s]
    tolerance_k : float
        A stamp is unmet when indoor is below its setpoint by more than this; each stamp
        stands for one step of time. [K]

    Returns
    -------
    dict
        ``unmet_hours`` [h] and ``comfort_degree_hours_k_h`` (sum of the shortfall below the
        setpoint times time, no tolerance) [K h].
    """
    gap = np.asarray(setpoint_c, dtype=float) - np.asarray(indoor_c, dtype=float)
    hours = step_s / 3600.0
    return {
        "unmet_hours": float(np.count_nonzero(gap > tolerance_k) * hours),
        "comfort_degree_hours_k_h": float(np.clip(gap, 0.0, None).sum() * hours),
    }


def design_loads(ua_w_per_k, setpoint_c, weather):
    """
    Steady-state heating load at the weather file's own 99.6 % and 99 % dry-bulb.

    Parameters
    ----------
    ua_w_per_k : float
        Heat loss coefficient. [W K⁻¹]
    setpoint_c : float
        Indoor design temperature (the occupied setpoint). [°C]
    weather : pandas.DataFrame
        Hourly weather with ``outdoor_c``.

    Returns
    -------
    dict
        ``dry_bulb_99_6_c``, ``dry_bulb_99_c`` [°C], ``load_99_6_w``, ``load_99_w`` [W] and
        ``setpoint_c``; gains are ignored at design conditions (common practice).

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, ch. 14 "Climatic design information" and ch. 17/18
       (heating load = UA x design temperature difference; from memory).
    """
    temps = heating_design_temperatures(weather)
    out = {"setpoint_c": float(setpoint_c), "hours": temps["hours"]}
    for key in ("99_6", "99"):
        t = temps[f"dry_bulb_{key}_c"]
        out[f"dry_bulb_{key}_c"] = t
        out[f"load_{key}_w"] = float(ua_w_per_k * max(setpoint_c - t, 0.0))
    return out


def degree_hour_check(ua_w_per_k, frame, step_s, gains_w):
    """
    UA x degree-hours against the simulated heating energy.

    Parameters
    ----------
    ua_w_per_k : float
        Heat loss coefficient. [W K⁻¹]
    frame : pandas.DataFrame
        With ``setpoint_c``, ``outdoor_mean_c`` and ``heating_w`` per interval.
    step_s : float
        Interval length. [s]
    gains_w : pandas.Series
        Solar plus internal gains per interval. [W]

    Returns
    -------
    dict
        ``degree_hours_k_h`` (sum of max(setpoint - outdoor, 0) dt) [K h],
        ``ua_degree_hours_kwh``, ``simulated_kwh``, ``difference_kwh`` (UA x DH minus simulated),
        ``gains_kwh`` (all gains), ``gains_in_heating_hours_kwh`` (gains while
        outdoor < setpoint) [kWh] and ``implied_gain_utilisation`` (difference over all gains:
        the share of the gains that offset heating, if gains explain the whole difference).

    Notes
    -----
    The variable-base degree-hour method [1]_: without gains, storage or setback, heat =
    UA x degree-hours. The simulated energy is lower by the useful part of the gains (solar and
    internal) and by any setback, and differs a little by heat stored in the mass.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, ch. 19 "Energy estimating and modeling methods",
       degree-day and variable-base degree-day methods (from memory).
    """
    hours = step_s / 3600.0
    deficit = np.clip(frame["setpoint_c"] - frame["outdoor_mean_c"], 0.0, None)
    dh = float(deficit.sum() * hours)
    ua_kwh = ua_w_per_k * dh / 1000.0
    sim_kwh = float(frame["heating_w"].sum() * step_s / 3.6e6)
    gains_kwh = float(gains_w.sum() * step_s / 3.6e6)
    heating_hours = (deficit > 0).to_numpy()
    gains_heating_kwh = float(gains_w.to_numpy()[heating_hours].sum() * step_s / 3.6e6)
    diff = ua_kwh - sim_kwh
    return {
        "degree_hours_k_h": dh,
        "ua_degree_hours_kwh": ua_kwh,
        "simulated_kwh": sim_kwh,
        "difference_kwh": diff,
        "gains_kwh": gains_kwh,
        "gains_in_heating_hours_kwh": gains_heating_kwh,
        "implied_gain_utilisation": float(diff / gains_kwh) if gains_kwh > 0 else None,
        "note": ("UA x degree-hours ignores gains and storage; the simulated energy is lower by the useful "
                 "solar and internal gains (and by any setback)."),
    }


def _interval_outdoor_mean(outdoor):
    """Mean of a linearly interpolated (first-order hold) temperature over each interval."""
    v = outdoor.to_numpy(dtype=float)
    mean = v.copy()
    mean[:-1] = 0.5 * (v[:-1] + v[1:])
    return pd.Series(mean, index=outdoor.index)


def _solar_gains_w(network, inputs):
    gain = sum(g for ch, _, g in network.heat_inputs if ch == SOLAR)
    return inputs[SOLAR] * gain


def _rises(setpoint):
    sp = np.asarray(setpoint, dtype=float)
    return np.flatnonzero(np.diff(sp) > 1e-9) + 1


def frame_of(sim, inputs, setpoint, extra=None):
    """
    The per-interval output frame of a run.

    Parameters
    ----------
    sim : SimulationResult
        From :func:`run_heater`.
    inputs : pandas.DataFrame
        The model inputs of the run.
    setpoint : array_like
        Setpoint at each stamp. [°C]
    extra : dict, optional
        From :func:`run_heater` (adds ``heater_on`` for the thermostat).

    Returns
    -------
    pandas.DataFrame
        The columns of :attr:`ForecastResult.frame`, plus ``outdoor_mean_c`` (interval mean). [°C, W, W m⁻²]
    """
    heat = sim.inputs[HEATING].to_numpy()
    data = {
        "indoor_c": sim.temperatures_c["indoor"].to_numpy(),
        "indoor_mean_c": sim.mean_temperatures_c["indoor"].to_numpy(),
        "setpoint_c": np.asarray(setpoint, dtype=float),
        "heating_w": heat,
        "shortfall_w": np.zeros_like(heat) if sim.shortfall_w is None else sim.shortfall_w.to_numpy(),
        "outdoor_c": inputs[OUTDOOR].to_numpy(),
        "outdoor_mean_c": _interval_outdoor_mean(inputs[OUTDOOR]).to_numpy(),
        "ghi_w_m2": inputs[SOLAR].to_numpy(),
        "internal_w": inputs[INTERNAL].to_numpy(),
    }
    if extra and extra.get("heater_on") is not None:
        data["heater_on"] = extra["heater_on"].astype(int)
    return pd.DataFrame(data, index=inputs.index)


def hourly_means(heating_w, step_s):
    """
    Hourly means of a per-step power series (whole hours only).

    Parameters
    ----------
    heating_w : array_like
        Mean power over each step. [W]
    step_s : float
        Step, dividing one hour. [s]

    Returns
    -------
    numpy.ndarray
        Mean power over each whole hour. [W]
    """
    heat = np.asarray(heating_w, dtype=float)
    per_hour = int(round(3600.0 / step_s))
    hourly = heat[: heat.size // per_hour * per_hour].reshape(-1, per_hour).mean(axis=1)
    return hourly if hourly.size else heat


def run_summary(frame, step_s, occupied, tolerance_k=UNMET_TOLERANCE_K):
    """
    Energy, peak and comfort figures of one run.

    Parameters
    ----------
    frame : pandas.DataFrame
        From :func:`frame_of`.
    step_s : float
        Interval length. [s]
    occupied : array_like of bool
        Occupied intervals (for the occupied minimum temperature).
    tolerance_k : float
        Unmet tolerance. [K]

    Returns
    -------
    dict
    """
    heat = frame["heating_w"]
    hourly = hourly_means(heat, step_s)
    occ = np.asarray(occupied, dtype=bool)
    indoor = frame["indoor_c"].to_numpy()
    out = {
        "heating_kwh": float(heat.sum() * step_s / 3.6e6),
        "peak_heating_w": float(heat.max()),
        "peak_hourly_heating_w": float(hourly.max()),
        "peak_time": heat.idxmax().isoformat(),
        **comfort_metrics(indoor, frame["setpoint_c"], step_s, tolerance_k),
        "unmet_tolerance_k": float(tolerance_k),
        "shortfall_kwh": float(frame["shortfall_w"].sum() * step_s / 3.6e6),
        "shortfall_hours": float(np.count_nonzero(frame["shortfall_w"].to_numpy() > 1e-6) * step_s / 3600.0),
        "min_indoor_c": float(indoor.min()),
        "min_occupied_indoor_c": float(indoor[occ].min()) if occ.any() else None,
        "monthly_kwh": energy_by_month(heat, step_s),
    }
    return out


def safety_cautions(summary, occupied_setpoint_c):
    """
    The WHO 18 degC and 10 degC pipe cautions that a run's temperatures call for.

    Parameters
    ----------
    summary : dict
        With ``min_indoor_c`` and ``min_occupied_indoor_c`` (or None). [°C]
    occupied_setpoint_c : float
        The occupied setpoint; below 18 degC it calls for the WHO caution by itself. [°C]

    Returns
    -------
    list of str

    References
    ----------
    .. [1] World Health Organization, WHO Housing and Health Guidelines, Geneva, 2018 (18 degC).
    """
    out = []
    occ_min = summary.get("min_occupied_indoor_c")
    if (occ_min is not None and occ_min < WHO_MIN_INDOOR_C - 1e-9) or occupied_setpoint_c < WHO_MIN_INDOOR_C:
        out.append(CAUTIONS["who"])
    if summary["min_indoor_c"] < PIPE_MIN_INDOOR_C:
        out.append(CAUTIONS["pipes"])
    return out


def _percentiles(values):
    v = np.asarray(values, dtype=float)
    return {"p10": float(np.percentile(v, 10)), "p50": float(np.percentile(v, 50)), "p90": float(np.percentile(v, 90))}


def forecast(result, weather, setpoint=20.0, heater=None, capacity_w=None, deadband_k=DEFAULT_DEADBAND_K,
             step_s=300.0, tolerance_k=UNMET_TOLERANCE_K, n_draws=0, seed=0, tz=None, metadata=None,
             progress=None):
    """
    Heating demand of a calibrated home under a weather file.

    Parameters
    ----------
    result : CalibrationResult
        The calibrated model.
    weather : pandas.DataFrame
        From :func:`thermorc.read.read_weather` (hourly ``outdoor_c``, ``ghi_w_m2``).
    setpoint : float or Schedule
        A constant setpoint [°C] or a weekly program (:func:`thermorc.schedule.read_schedule`).
    heater : {'ideal', 'capacity', 'thermostat'}, optional
        Default: ``'capacity'`` when ``capacity_w`` is given, else ``'ideal'``.
    capacity_w : float, optional
        Heater output. [W]
    deadband_k : float
        Thermostat switching differential. [K]
    step_s : float
        Model step, dividing one hour. [s]
    tolerance_k : float
        Unmet-hours tolerance: indoor below setpoint by more than this. [K]
    n_draws : int
        Monte Carlo draws from the calibration covariance for P10/P50/P90 (0: none).
    seed : int
        Seed of the draws.
    tz : str, optional
        IANA zone whose clock the schedule follows (default: the weather file's own clock,
        standard time for TMY3/EPW).
    metadata : dict, optional
        Weather metadata from ``read_weather`` (name, source format) for the summary.
    progress : callable, optional
        ``progress(iterable, total)`` wraps the Monte Carlo loop (e.g. a progress bar).

    Returns
    -------
    ForecastResult
        ``summary`` keys: ``heating_kwh``, ``peak_heating_w``, ``peak_hourly_heating_w``,
        ``unmet_hours`` (time with indoor below the setpoint by more than
        ``unmet_tolerance_k``, default 0.5 K, checked at each stamp), ``comfort_degree_hours_k_h``, ``monthly_kwh``
        (``"YYYY-MM"`` -> kWh), ``design`` (:func:`design_loads`), ``degree_hours``
        (:func:`degree_hour_check`), ``monte_carlo`` (P10/P50/P90 of ``heating_kwh``,
        ``peak_hourly_heating_w`` and the 99.6 % design load, or ``None``), ``cycles`` for
        the thermostat, and ``cautions``.

    References
    ----------
    .. [1] World Health Organization, WHO Housing and Health Guidelines, Geneva, 2018,
       ch. 3 (indoor cold: 18 degC).
    .. [2] ASHRAE Handbook - Fundamentals, ch. 14 (design conditions) and ch. 19 (degree-day
       methods); from memory.
    """
    heater = _check_heater(heater, capacity_w)
    if not float(tolerance_k) >= 0:
        raise InputError(f"unmet tolerance is {tolerance_k!r} K (expected >= 0)", column="tolerance_k")
    step = _check_step(step_s)
    schedule = setpoint if isinstance(setpoint, Schedule) else Schedule.constant(setpoint)
    network = result.network()
    inputs = model_inputs(result, weather, step)
    clock = inputs.index.tz_convert(tz) if tz else inputs.index
    sp = setpoint_series(schedule, clock).to_numpy()
    occupied = occupied_mask(schedule, pd.Series(sp, index=inputs.index)).to_numpy()
    sim, extra = run_heater(network, inputs, sp, heater, capacity_w, deadband_k)
    frame = frame_of(sim, inputs, sp, extra)
    summary = run_summary(frame, step, occupied, tolerance_k)
    ua = float(network.heat_loss_coefficient_w_per_k("indoor")["total"])
    design_sp = float(max(schedule.occupied_c, sp.max()))
    gains = _solar_gains_w(network, inputs) + inputs[INTERNAL]
    summary.update({
        "heater": heater,
        "capacity_w": None if capacity_w is None else float(capacity_w),
        "deadband_k": float(deadband_k) if heater == "thermostat" else None,
        "cycles": extra["cycles"],
        "step_s": step,
        "schedule": schedule.name,
        "ua_w_per_k": ua,
        "solar_kwh": float(_solar_gains_w(network, inputs).sum() * step / 3.6e6),
        "internal_kwh": float(inputs[INTERNAL].sum() * step / 3.6e6),
        "design": design_loads(ua, design_sp, weather),
        "degree_hours": degree_hour_check(ua, frame, step, gains),
        "hdd65_f_day": heating_degree_days(weather)["annual_f_day"],
        "warmed_up": extra["warmed_up"],
        "weather": {k: (metadata or {}).get(k) for k in ("name", "source_format", "latitude", "longitude")},
        "start": inputs.index[0].isoformat(),
        "end": (inputs.index[-1] + pd.Timedelta(seconds=step)).isoformat(),
    })
    summary["monte_carlo"] = None
    cautions = [CAUTIONS["design"], CAUTIONS["design_gains"]]
    if heater == "thermostat":
        note = thermostat_caution(network, capacity_w, step, deadband_k)
        cautions += [note] if note else []
    if n_draws:
        try:
            draws = result.parameter_draws(int(n_draws), seed=seed)
        except ValueError:
            cautions.append("No Monte Carlo percentiles: the calibration result has no usable parameter covariance.")
        else:
            if progress is not None:
                draws = progress(draws, len(draws))
            summary["monte_carlo"] = _monte_carlo(result, draws, inputs, sp, heater, capacity_w, deadband_k,
                                                  step, design_sp, weather, int(seed))
    if (metadata or {}).get("source_format") in ("tmy3", "epw"):
        cautions.append(CAUTIONS["typical_year"])
    if heater == "ideal" and _rises(sp).size:
        cautions.append(CAUTIONS["ideal_peak"])
    if _rises(sp).size:
        cautions.append(CAUTIONS["heat_pump"])
    if summary["shortfall_hours"] > 0:
        cautions.append(f"The heater capacity was not enough for {summary['shortfall_hours']:.1f} h "
                        f"(shortfall {summary['shortfall_kwh']:.1f} kWh); the home ran colder than the setpoint.")
    cautions += safety_cautions(summary, design_sp)
    if not extra["warmed_up"]:
        cautions.append("The run starts from a steady state (the weather does not span a whole year to wrap "
                        "around); the first days carry that start.")
    cautions += [f"Calibration warning: {w}" for w in result.warnings]
    summary["cautions"] = cautions
    return ForecastResult(frame=frame, summary=summary, cautions=cautions, simulation=sim)


def _monte_carlo(result, draws, inputs, sp, heater, capacity_w, deadband_k, step, design_sp, weather, seed):
    energy, peak, design = [], [], []
    for params in draws:
        net = result.network(params)
        frame_in = inputs.assign(**{INTERNAL: result.internal_gains_w(inputs.index, params).to_numpy()})
        sim, _ = run_heater(net, frame_in, sp, heater, capacity_w, deadband_k)
        heat = sim.inputs[HEATING].to_numpy()
        energy.append(heat.sum() * step / 3.6e6)
        peak.append(hourly_means(heat, step).max())
        ua = net.heat_loss_coefficient_w_per_k("indoor")["total"]
        design.append(design_loads(ua, design_sp, weather)["load_99_6_w"])
    return {
        "n_draws": len(energy),
        "seed": seed,
        "heating_kwh": _percentiles(energy),
        "peak_hourly_heating_w": _percentiles(peak),
        "design_load_99_6_w": _percentiles(design),
    }
