r"""
Setback strategies against a baseline: energy, savings, recovery peak, comfort, optimal start.

A strategies file (TOML, format in docs/forecasting.md) holds a baseline schedule and a list of
strategies, each a schedule (the *comfort* program: what the occupants want and when) plus an
optional fixed preheat or an optimal start. The heater follows a *control* program: the
comfort program with each rise into an occupied period moved earlier by the preheat, or by
the optimal-start lead. Comfort figures (unmet hours, comfort degree-hours, recovery time,
minimum occupied temperature) are measured against the comfort program.

Optimal start (capacity-limited heater): for each morning, the latest start that still brings
the indoor node to the occupied setpoint at the occupied time. From the state the setback
leaves at stamp :math:`m`, running at full output :math:`Q` for the :math:`n = e - m` steps up
to the occupied stamp :math:`e` gives, with the one-step matrices :math:`\Phi`, :math:`d_k`
(weather and gains) and :math:`b_q` (heater),

.. math::

    x_e = \Phi^n x_m + \sum_{j=1}^{n} \Phi^{j-1} (d_{e-j} + b_q Q),

which is built backwards from :math:`e` one step at a time; since an earlier start can only
leave the home warmer, the smallest :math:`n` whose indoor temperature reaches the setpoint is
the latest start. The pass runs forwards through the year so each morning starts from the state
the previous days really left.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.errors import InputError
from thermorc.forecast import (
    CAUTIONS,
    DEFAULT_DEADBAND_K,
    HEATERS,
    UNMET_TOLERANCE_K,
    _check_heater,
    _check_step,
    _step_matrices,
    comfort_metrics,
    energy_by_month,
    hourly_means,
    model_inputs,
    run_heater,
    safety_cautions,
    step_drive,
    thermostat_caution,
    warm_start,
)
from thermorc.network import HEATING
from thermorc.schedule import Schedule, occupied_mask, parse_schedule, read_schedule, read_toml, setpoint_series

__all__ = ["Strategy", "StrategySet", "SetbackComparison", "read_strategies", "parse_strategies", "compare",
           "optimal_start_leads", "preheat_control"]

_STRATEGY_KEYS = {"name", "description", "preheat_h", "optimal_start", "max_lead_h", "schedule_file"}
_TOP_KEYS = {"baseline", "strategy", "heater", "capacity_w", "deadband_k", "name", "description"}

#: Longest optimal-start lead looked for, unless a strategy says otherwise. [h]
DEFAULT_MAX_LEAD_H = 6.0


@dataclass
class Strategy:
    """
    One setback strategy.

    Attributes
    ----------
    name : str
        Unique label.
    schedule : Schedule
        Comfort program.
    preheat_h : float
        Fixed preheat: the control setpoint rises this long before each occupied period. [h]
    optimal_start : bool
        Find the latest start each morning instead (capacity-limited heater).
    max_lead_h : float
        Longest optimal-start lead. [h]
    description : str
        Free text.
    """

    name: str
    schedule: Schedule
    preheat_h: float = 0.0
    optimal_start: bool = False
    max_lead_h: float = DEFAULT_MAX_LEAD_H
    description: str = ""


@dataclass
class StrategySet:
    """
    A baseline, the strategies to compare with it, and optional heater settings.

    Attributes
    ----------
    baseline : Strategy
    strategies : list of Strategy
    heater : str or None
        ``'ideal'``, ``'capacity'`` or ``'thermostat'``; ``None``: decided by the capacity.
    capacity_w : float or None
        Heater output. [W]
    deadband_k : float or None
        Thermostat switching differential. [K]
    """

    baseline: Strategy
    strategies: list
    heater: str | None = None
    capacity_w: float | None = None
    deadband_k: float | None = None


@dataclass
class SetbackComparison:
    """
    What a comparison found.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per strategy (baseline first): energy, savings, peaks, comfort, recovery.
    monthly_kwh : pandas.DataFrame
        Heating energy by month (rows ``"YYYY-MM"``) and strategy (columns). [kWh]
    details : dict
        Strategy name -> per-strategy figures (optimal-start leads, cautions).
    cautions : list of str
        Cautions that apply to the whole comparison.
    frames : dict
        Strategy name -> per-interval frame (``indoor_c``, ``setpoint_c`` (comfort),
        ``control_c``, ``heating_w``).
    settings : dict
        ``heater``, ``capacity_w`` [W], ``deadband_k`` [K], ``step_s`` [s], ``tolerance_k`` [K] used.
    """

    table: pd.DataFrame
    monthly_kwh: pd.DataFrame
    details: dict
    cautions: list = field(default_factory=list)
    frames: dict = field(default_factory=dict)
    settings: dict = field(default_factory=dict)

    def to_dict(self):
        """Everything but the frames, as plain types (for JSON)."""
        return {
            "settings": dict(self.settings),
            "strategies": self.table.reset_index().to_dict(orient="records"),
            "monthly_kwh": {c: self.monthly_kwh[c].to_dict() for c in self.monthly_kwh.columns},
            "details": self.details,
            "cautions": list(self.cautions),
        }

    def __repr__(self):
        return f"SetbackComparison(strategies={list(self.table.index)}, cautions={len(self.cautions)})"


# -- the strategies file ----------------------------------------------------------------------
def read_strategies(path):
    """
    Read a strategies file.

    Parameters
    ----------
    path : str or os.PathLike
        TOML file (format in docs/forecasting.md).

    Returns
    -------
    StrategySet

    Raises
    ------
    InputError
        Naming the file and the key that is wrong.
    """
    return parse_strategies(read_toml(path), path=os.fspath(path))


def parse_strategies(data, path=None):
    """
    Build a :class:`StrategySet` from parsed TOML.

    Parameters
    ----------
    data : dict
        ``baseline`` table, ``strategy`` array of tables, optional ``heater``, ``capacity_w``,
        ``deadband_k``.
    path : str, optional
        File name for messages; ``schedule_file`` keys are relative to its folder.

    Returns
    -------
    StrategySet
    """
    unknown = [k for k in data if k not in _TOP_KEYS]
    if unknown:
        raise InputError(f"unknown key '{unknown[0]}' (expected {', '.join(sorted(_TOP_KEYS))})",
                         path=path, column=unknown[0])
    if "baseline" not in data:
        raise InputError("missing (expected a [baseline] table with a schedule, e.g. constant_c = 20.0)",
                         path=path, column="baseline")
    baseline = _strategy(data["baseline"], path, "baseline.", "baseline")
    if baseline.optimal_start or baseline.preheat_h:
        raise InputError("the baseline takes no preheat or optimal start (expected a plain schedule)",
                         path=path, column="baseline")
    entries = data.get("strategy", [])
    if not isinstance(entries, list) or not entries:
        raise InputError("expected one or more [[strategy]] tables", path=path, column="strategy")
    strategies, names = [], {baseline.name}
    for i, entry in enumerate(entries):
        s = _strategy(entry, path, f"strategy[{i}].", f"strategy {i + 1}")
        if s.name in names:
            raise InputError(f"name '{s.name}' is used twice (expected unique names)", path=path,
                             column=f"strategy[{i}].name")
        names.add(s.name)
        strategies.append(s)
    heater = data.get("heater")
    if heater is not None and heater not in HEATERS:
        raise InputError(f"{heater!r} is not a heater (expected one of {', '.join(HEATERS)})", path=path,
                         column="heater")
    # Upper bounds far above any home's heater and thermostat (common practice): typing errors.
    capacity = _positive(data.get("capacity_w"), path, "capacity_w", "W", high=1e7)
    deadband = _positive(data.get("deadband_k"), path, "deadband_k", "K", high=20.0)
    return StrategySet(baseline=baseline, strategies=strategies, heater=heater, capacity_w=capacity,
                       deadband_k=deadband)


def _positive(value, path, key, unit, high=math.inf):
    if value is None:
        return None
    if isinstance(value, int) and abs(value) > 1e300:  # a TOML integer beyond the float range
        value = math.inf
    if (isinstance(value, bool) or not isinstance(value, (int, float))
            or not (math.isfinite(value) and 0 < value <= high)):
        raise InputError(f"{value!r} is not a positive number (expected {unit} > 0 and <= {high:g})", path=path,
                         column=key)
    return float(value)


def _strategy(entry, path, prefix, default_name):
    if not isinstance(entry, dict):
        raise InputError("expected a table", path=path, column=prefix.rstrip("."))
    name = entry.get("name", default_name)
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"{name!r} is not a name (expected text)", path=path, column=prefix + "name")
    sched_keys = {k: v for k, v in entry.items() if k not in _STRATEGY_KEYS}
    if "schedule_file" in entry:
        if sched_keys:
            raise InputError(f"schedule_file cannot be combined with schedule keys {sorted(sched_keys)}",
                             path=path, column=prefix + "schedule_file")
        ref = entry["schedule_file"]
        if not isinstance(ref, str):
            raise InputError(f"{ref!r} is not a file name", path=path, column=prefix + "schedule_file")
        base = os.path.dirname(os.fspath(path)) if path else ""
        if not os.path.isfile(os.path.join(base, ref)):
            raise InputError(f"{ref!r}: no such file (paths are relative to this file's folder)", path=path,
                             column=prefix + "schedule_file")
        schedule = read_schedule(os.path.join(base, ref))
        schedule.name = name
    else:
        schedule = parse_schedule({**sched_keys, "name": name}, path=path, prefix=prefix)
    preheat = entry.get("preheat_h", 0.0)
    if isinstance(preheat, bool) or not isinstance(preheat, (int, float)) or not (0 <= preheat <= 24):
        raise InputError(f"{preheat!r} is not a preheat time (expected 0 to 24 h)", path=path,
                         column=prefix + "preheat_h")
    optimal = entry.get("optimal_start", False)
    if not isinstance(optimal, bool):
        raise InputError(f"{optimal!r} is not true or false", path=path, column=prefix + "optimal_start")
    if optimal and preheat:
        raise InputError("give either preheat_h or optimal_start, not both", path=path, column=prefix + "preheat_h")
    lead = entry.get("max_lead_h", DEFAULT_MAX_LEAD_H)
    if isinstance(lead, bool) or not isinstance(lead, (int, float)) or not (0 < lead <= 24):
        raise InputError(f"{lead!r} is not a lead time (expected more than 0 and up to 24 h)", path=path,
                         column=prefix + "max_lead_h")
    return Strategy(name=name.strip(), schedule=schedule, preheat_h=float(preheat), optimal_start=optimal,
                    max_lead_h=float(lead), description=str(entry.get("description", "")))


# -- control programs ------------------------------------------------------------------------
def rise_events(comfort_c, occupied):
    """
    Stamps where the comfort setpoint rises into an occupied period, and where each setback began.

    Parameters
    ----------
    comfort_c : numpy.ndarray
        Comfort setpoint at each stamp. [°C]
    occupied : numpy.ndarray of bool
        Occupied stamps.

    Returns
    -------
    events : numpy.ndarray of int
        Stamps ``e`` with ``comfort[e] > comfort[e - 1]`` and ``occupied[e]``.
    previous_change : numpy.ndarray of int
        For each event, the stamp of the last setpoint change before it (or 0).
    """
    sp = np.asarray(comfort_c, dtype=float)
    change = np.flatnonzero(np.abs(np.diff(sp)) > 1e-9) + 1
    rises = change[(sp[change] > sp[change - 1]) & np.asarray(occupied, dtype=bool)[change]]
    pos = np.searchsorted(change, rises, side="left") - 1
    prev = np.where(pos >= 0, change[np.clip(pos, 0, None)], 0)
    return rises.astype(np.int64), prev.astype(np.int64)


def preheat_control(comfort_c, events, previous_change, lead_steps):
    """
    The control program: each occupied setpoint starts ``lead_steps`` stamps early.

    Parameters
    ----------
    comfort_c : numpy.ndarray
        Comfort setpoint at each stamp. [°C]
    events, previous_change : numpy.ndarray of int
        From :func:`rise_events`.
    lead_steps : int or numpy.ndarray of int
        Lead per event, in steps; clipped so that a lead never reaches back past the stamp
        where the setback began.

    Returns
    -------
    control : numpy.ndarray
        Control setpoint. [°C]
    leads : numpy.ndarray of int
        Leads used, in steps.
    """
    control = np.array(comfort_c, dtype=float)
    leads = np.broadcast_to(np.asarray(lead_steps, dtype=np.int64), events.shape).copy()
    leads = np.minimum(leads, events - previous_change - 1).clip(min=0)
    for e, n in zip(events, leads):
        if n:
            control[e - n:e] = control[e]
    return control, leads


def _optimal_start_loop(ad, drive, bq, sp_ext, x, si, cap, events, windows, powers, heat, leads, reached):
    """Forward pass with the capacity-limited deadbeat heater; picks each morning's latest start."""
    n_steps = drive.shape[0]
    n = x.shape[0]
    tgt = sp_ext.copy()
    max_lead = powers.shape[0] - 1
    buf = np.empty((max_lead + 1, n))
    xn = np.empty(n)
    g = np.empty(n)
    xe = np.empty(n)
    j = 0
    k = 0
    while k < n_steps:
        if j < events.shape[0] and k == windows[j]:
            e = events[j]
            w = windows[j]
            # States at stamps w .. e-1 under the setback program (targets before e are setback).
            for i in range(n):
                buf[0, i] = x[i]
            xs = x.copy()
            for m in range(w, e - 1):
                for i in range(n):
                    acc = drive[m, i]
                    for c in range(n):
                        acc += ad[i, c] * xs[c]
                    xn[i] = acc
                need = (tgt[m + 1] - xn[si]) / bq[si]
                q = 0.0 if need <= 0.0 else (cap if need > cap else need)
                for i in range(n):
                    xs[i] = xn[i] + bq[i] * q
                    buf[m + 1 - w, i] = xs[i]
            # Backwards from e: full output for the last n steps, smallest n that reaches the setpoint.
            for i in range(n):
                g[i] = 0.0
            chosen = e - w
            ok = False
            for steps in range(1, e - w + 1):
                for i in range(n):
                    acc = 0.0
                    for c in range(n):
                        acc += powers[steps - 1, i, c] * (drive[e - steps, c] + bq[c] * cap)
                    g[i] += acc
                for i in range(n):
                    acc = g[i]
                    for c in range(n):
                        acc += powers[steps, i, c] * buf[e - steps - w, c]
                    xe[i] = acc
                if xe[si] >= sp_ext[e] - 1e-6:
                    chosen = steps
                    ok = True
                    break
            leads[j] = chosen - 1
            reached[j] = ok
            for m in range(e - chosen + 1, e):
                tgt[m] = sp_ext[e]
            j += 1
        for i in range(n):
            acc = drive[k, i]
            for c in range(n):
                acc += ad[i, c] * x[c]
            xn[i] = acc
        need = (tgt[k + 1] - xn[si]) / bq[si]
        q = 0.0 if need <= 0.0 else (cap if need > cap else need)
        heat[k] = q
        for i in range(n):
            x[i] = xn[i] + bq[i] * q
        k += 1


try:  # numba compiles the pass; without it the same code runs, slowly, as Python.
    import numba

    _optimal_start_loop = numba.njit(cache=True)(_optimal_start_loop)
except ImportError:  # pragma: no cover - numba is a declared dependency
    pass


def optimal_start_leads(network, inputs, comfort_c, occupied, capacity_w, max_lead_h=DEFAULT_MAX_LEAD_H, x0=None,
                        node="indoor", channel=HEATING):
    """
    Latest start each morning that still reaches the occupied setpoint on time.

    Parameters
    ----------
    network : Network
    inputs : pandas.DataFrame
        Uniform model inputs (:func:`thermorc.forecast.model_inputs`).
    comfort_c : numpy.ndarray
        Comfort setpoint at each stamp. [°C]
    occupied : numpy.ndarray of bool
        Occupied stamps.
    capacity_w : float
        Heater output. [W]
    max_lead_h : float
        Longest lead looked for. [h]
    x0 : array_like, optional
        Start state [°C]; default: steady state at the first setpoint.
    node, channel : str
        Controlled node and heater channel.

    Returns
    -------
    events : numpy.ndarray of int
        Occupied-start stamps.
    leads : numpy.ndarray of int
        Lead of the control setpoint before each event, in steps (0: rise at the occupied time).
    reached : numpy.ndarray of bool
        Whether full output within ``max_lead_h`` reaches the setpoint on time.

    Notes
    -----
    The heater is the clipped deadbeat heater of :func:`thermorc.simulate.hold_setpoint`: each
    interval it aims at the control setpoint of the stamp that ends it. See the module
    docstring for the backwards construction of the full-output response, the superposition of
    the zero-input and forced responses of the exact discrete-time model [1]_.

    References
    ----------
    .. [1] G. F. Franklin, J. D. Powell and M. L. Workman, Digital Control of Dynamic Systems,
       3rd ed. Addison-Wesley, 1998, ch. 4 (solution of the discrete state equation).
    """
    if capacity_w is None:
        raise InputError("optimal start needs a heater capacity (give capacity_w)", column="capacity_w")
    space = network.state_space()
    step = float(np.median(np.diff(inputs.index.as_unit("ns").asi8)) / 1e9)
    sp = np.asarray(comfort_c, dtype=float)
    events, prev = rise_events(sp, occupied)
    max_lead = max(1, int(round(max_lead_h * 3600.0 / step)))
    windows = np.maximum(events - max_lead - 1, prev)
    ad, b0, b1 = _step_matrices(space, step)
    ci = list(space.inputs).index(channel)
    si = list(space.states).index(node)
    u = inputs.assign(**{channel: 0.0})[list(space.inputs)].to_numpy(dtype=float)
    drive = step_drive(u, b0, b1)
    powers = np.empty((max_lead + 2, len(space.states), len(space.states)))
    powers[0] = np.eye(len(space.states))
    for i in range(1, powers.shape[0]):
        powers[i] = ad @ powers[i - 1]
    if x0 is None:
        from thermorc.simulate import hold_setpoint

        x0 = hold_setpoint(network, inputs.iloc[:2], sp[:2]).temperatures_c[list(space.states)].to_numpy()[0]
    heat = np.zeros(len(u))
    leads = np.zeros(len(events), dtype=np.int64)
    reached = np.zeros(len(events), dtype=np.bool_)
    sp_ext = np.concatenate([sp, sp[-1:]])
    _optimal_start_loop(np.ascontiguousarray(ad), drive, np.ascontiguousarray(b0[:, ci]), sp_ext,
                        np.array(x0, dtype=float), int(si), float(capacity_w), events, windows.astype(np.int64),
                        powers, heat, leads, reached)
    return events, leads, reached


# -- the comparison ----------------------------------------------------------------------------
def _recovery(indoor, comfort, events, control_start, heat, step, tolerance_k):
    """Recovery time (h) and peak power (W) after each occupied start."""
    n = indoor.size
    ok = indoor >= comfort - tolerance_k
    idx = np.where(ok, np.arange(n), n)
    next_ok = np.minimum.accumulate(idx[::-1])[::-1]
    ends = next_ok[events] if events.size else np.zeros(0, dtype=np.int64)
    hours = (np.minimum(ends, n) - events) * step / 3600.0
    peaks = np.array([heat[max(s - 1, 0):max(min(e, n), s)].max(initial=0.0) for s, e in zip(control_start, ends)])
    return hours, peaks, ends >= n


def _run_strategy(strategy, network, inputs, clock, heater, capacity_w, deadband_k, step, tolerance_k):
    comfort = setpoint_series(strategy.schedule, clock).to_numpy()
    occupied = occupied_mask(strategy.schedule, pd.Series(comfort, index=inputs.index)).to_numpy()
    events, prev = rise_events(comfort, occupied)
    x0 = warm_start(network, inputs, comfort, heater, capacity_w, deadband_k)
    reached = None
    if strategy.optimal_start:
        if heater == "ideal":
            raise InputError(f"strategy '{strategy.name}': optimal start needs a capacity-limited heater "
                             "(give a heater capacity)", column="optimal_start")
        events, leads, reached = optimal_start_leads(network, inputs, comfort, occupied, capacity_w,
                                                     strategy.max_lead_h, x0=x0)
        control, leads = preheat_control(comfort, events, prev, leads)
    else:
        control, leads = preheat_control(comfort, events, prev, int(round(strategy.preheat_h * 3600.0 / step)))
    sim, extra = run_heater(network, inputs, control, heater, capacity_w, deadband_k, x0=x0)
    heat = sim.inputs[HEATING].to_numpy()
    indoor = sim.temperatures_c["indoor"].to_numpy()
    hours, peaks, never = _recovery(indoor, comfort, events, events - leads, heat, step, tolerance_k)
    hourly = hourly_means(heat, step)
    row = {
        "heating_kwh": float(heat.sum() * step / 3.6e6),
        "peak_heating_w": float(heat.max()),
        "peak_hourly_heating_w": float(hourly.max()),
        "peak_recovery_w": float(peaks.max()) if peaks.size else None,
        **comfort_metrics(indoor, comfort, step, tolerance_k),
        "min_indoor_c": float(indoor.min()),
        "min_occupied_indoor_c": float(indoor[occupied].min()) if occupied.any() else None,
        "mean_recovery_h": float(hours.mean()) if hours.size else None,
        "max_recovery_h": float(hours.max()) if hours.size else None,
        "occupied_starts": int(events.size),
        "cycles": extra["cycles"],
    }
    detail = {"preheat_h": strategy.preheat_h, "optimal_start": strategy.optimal_start,
              "schedule": repr(strategy.schedule)}
    if strategy.optimal_start:
        lead_h = leads * step / 3600.0
        detail.update({
            "max_lead_h": strategy.max_lead_h,
            "lead_h": {"mean": float(lead_h.mean()) if lead_h.size else None,
                       "min": float(lead_h.min()) if lead_h.size else None,
                       "max": float(lead_h.max()) if lead_h.size else None},
            "mornings_not_reached": int(np.count_nonzero(~reached)),
            "latest_starts": [clock[e - n].isoformat() for e, n in zip(events, leads)],
        })
    cautions = safety_cautions(row, strategy.schedule.occupied_c)
    if events.size and row["mean_recovery_h"] is not None and strategy.schedule.constant_c is None:
        cautions.append(CAUTIONS["heat_pump"])
    if strategy.optimal_start and detail["mornings_not_reached"]:
        cautions.append(f"On {detail['mornings_not_reached']} mornings the heater could not reach the occupied "
                        f"setpoint on time even starting {strategy.max_lead_h:g} h early.")
    detail["cautions"] = cautions
    frame = pd.DataFrame({"indoor_c": indoor, "setpoint_c": comfort, "control_c": control, "heating_w": heat},
                         index=inputs.index)
    return row, energy_by_month(pd.Series(heat, index=clock), step), detail, frame


def compare(result, weather, strategies, heater=None, capacity_w=None, deadband_k=None, step_s=300.0,
            tolerance_k=UNMET_TOLERANCE_K, tz=None, keep_frames=False):
    """
    Compare setback strategies with a baseline under one weather file.

    Parameters
    ----------
    result : CalibrationResult
        The calibrated model.
    weather : pandas.DataFrame
        From :func:`thermorc.read.read_weather`.
    strategies : StrategySet
        From :func:`read_strategies`. Its heater settings apply where the arguments are None.
    heater : {'ideal', 'capacity', 'thermostat'}, optional
        Default: the file's, else ``'capacity'`` with a capacity and ``'ideal'`` without.
    capacity_w : float, optional
        Heater output. [W]
    deadband_k : float, optional
        Thermostat switching differential. [K]
    step_s : float
        Model step. [s]
    tolerance_k : float
        Unmet tolerance. [K]
    tz : str, optional
        IANA zone whose clock the schedules follow (default: the weather file's clock).
    keep_frames : bool
        Keep each strategy's per-interval frame.

    Returns
    -------
    SetbackComparison
        ``table`` columns: ``heating_kwh``, ``savings_kwh``, ``savings_pct`` (against the
        baseline), ``peak_heating_w``, ``peak_hourly_heating_w``, ``peak_recovery_w`` (largest
        heating power from the control rise to the end of recovery), ``unmet_hours`` and
        ``comfort_degree_hours_k_h`` (against each strategy's comfort program),
        ``min_indoor_c``, ``min_occupied_indoor_c``, ``mean_recovery_h`` and
        ``max_recovery_h`` (from the occupied time until indoor is within the tolerance),
        ``occupied_starts`` and ``cycles`` (thermostat).

    References
    ----------
    .. [1] World Health Organization, WHO Housing and Health Guidelines, Geneva, 2018 (18 degC).
    .. [2] U.S. Department of Energy, "Programmable thermostats", energy.gov Energy Saver (setback
       savings rule of thumb).
    """
    heater = heater if heater is not None else strategies.heater
    capacity_w = capacity_w if capacity_w is not None else strategies.capacity_w
    deadband_k = deadband_k if deadband_k is not None else (strategies.deadband_k or DEFAULT_DEADBAND_K)
    heater = _check_heater(heater, capacity_w)
    step = _check_step(step_s)
    network = result.network()
    inputs = model_inputs(result, weather, step)
    clock = inputs.index.tz_convert(tz) if tz else inputs.index
    rows, months, details, frames = {}, {}, {}, {}
    for strategy in [strategies.baseline, *strategies.strategies]:
        row, month, detail, frame = _run_strategy(strategy, network, inputs, clock, heater, capacity_w,
                                                  deadband_k, step, tolerance_k)
        rows[strategy.name], months[strategy.name], details[strategy.name] = row, month, detail
        if keep_frames:
            frames[strategy.name] = frame
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "strategy"
    base = table["heating_kwh"].iloc[0]
    table.insert(1, "savings_kwh", base - table["heating_kwh"])
    table.insert(2, "savings_pct", 100.0 * (base - table["heating_kwh"]) / base if base > 0 else np.nan)
    monthly = pd.DataFrame(months)
    monthly.index.name = "month"
    base_month = monthly.iloc[:, 0]
    for name, detail in details.items():
        with np.errstate(invalid="ignore", divide="ignore"):
            pct = 100.0 * (base_month - monthly[name]) / base_month
        detail["monthly_savings_pct"] = {m: (float(v) if np.isfinite(v) else None) for m, v in pct.items()}
    cautions = [CAUTIONS["design"],
                "Savings are model estimates for this weather file; a real year, the occupants and the "
                "heating system's part-load efficiency change them."]
    if heater == "ideal":
        cautions.append(CAUTIONS["ideal_peak"])
    if heater == "thermostat":
        note = thermostat_caution(network, capacity_w, step, deadband_k)
        cautions += [note] if note else []
    seen = set(cautions)
    for detail in details.values():
        for c in detail["cautions"]:
            if c not in seen and not c.startswith("On "):
                cautions.append(c)
                seen.add(c)
    cautions += [f"Calibration warning: {w}" for w in result.warnings]
    settings = {"heater": heater, "capacity_w": capacity_w, "deadband_k": deadband_k if heater == "thermostat" else None,
                "step_s": step, "tolerance_k": float(tolerance_k)}
    return SetbackComparison(table=table, monthly_kwh=monthly, details=details, cautions=cautions, frames=frames,
                             settings=settings)
