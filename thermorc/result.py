"""
Calibration results: the container that RESULT.json stores and every later stage reads.

A :class:`CalibrationResult` holds what a calibration found (the network parameters in SI,
internal gains, uncertainty, fit metrics, warnings) and enough to rebuild the model for
simulation and forecasting: :meth:`CalibrationResult.network` and
:meth:`CalibrationResult.internal_gains_w`. It adds no algorithm of its own.

The JSON keys are a contract for scripts downstream; keep them stable:
``model``, ``parameters``, ``heat_loss_coefficient_w_per_k``, ``time_constants_h``,
``capacitance_j_per_k``, ``fit`` (``rmse_k``, ``cv_rmse_pct``, ``nmbe_pct``, ``n_samples``)
and ``warnings``.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from thermorc.errors import InputError
from thermorc.network import GROUND, PRESETS, Network, preset_parameters, with_ground

__all__ = ["CalibrationResult", "GAIN_PARAMETERS", "GAINS_SCHEDULES", "gains_schedule", "parse_gains_hours", "gains_periods",
           "gains_period_labels", "RESULT_FORMAT"]

#: Identifies the file layout; bump when keys change incompatibly.
RESULT_FORMAT = "thermorc-calibration/1"

#: Models of the unlogged internal gains: one level, or a level per period of the local day.
#: ``starts_h`` are the periods' starts [h, local time]; each runs to the next start (the
#: last one past midnight to the first). The four periods follow the morning and evening
#: peaks of residential occupancy (common practice; no source).
GAINS_SCHEDULES = {
    "constant": {"kind": "constant"},
    "day_night": {"kind": "day_night", "day_start_h": 7, "night_start_h": 23},
    "four_period": {"kind": "four_period", "starts_h": [6.0, 9.0, 17.0, 23.0],
                    "names": ["morning", "daytime", "evening", "night"]},
}


def gains_schedule(gains, hours=None, where="gains hours"):
    """
    The schedule of a gains model, with the start hours of its periods changed if given.

    Parameters
    ----------
    gains : str or dict
        A key of :data:`GAINS_SCHEDULES`, or a schedule already (returned as a copy).
    hours : sequence of float, optional
        Start of each period [h, local time, 0-24] in the order of the day: the day's and the
        night's for ``day_night`` (default 7, 23); morning, daytime, evening and night for
        ``four_period`` (default 6, 9, 17, 23). Each period runs to the next start, the last
        round midnight to the first (so the night may start after midnight: 9, 12, 20, 2).
    where : str
        What gave the hours, for messages.

    Returns
    -------
    dict
        A schedule as stored in RESULT.json ``gains_schedule``.

    Raises
    ------
    InputError
        An unknown model, hours for the constant model, the wrong number of hours, or hours
        outside 0-24 or out of the order of the day.
    """
    source = gains if isinstance(gains, dict) else GAINS_SCHEDULES.get(gains)
    kind = (source or {}).get("kind", "constant")
    if source is None or kind not in GAINS_SCHEDULES:
        raise InputError(f"gains is {gains!r} (expected one of {', '.join(map(repr, GAINS_SCHEDULES))})")
    schedule = {k: (list(v) if isinstance(v, list) else v) for k, v in source.items()}
    if hours is None:
        return schedule
    needed = {"day_night": 2, "four_period": 4}.get(kind)
    if needed is None:
        raise InputError(f"{where} need gains by day and night or in four periods (one constant level has no hours)")
    try:
        hours = [float(h) for h in hours]
    except (TypeError, ValueError):
        raise InputError(f"{where} must be numbers of hours, e.g. 6,9,17,23") from None
    if len(hours) != needed:
        raise InputError(f"{where} must be {needed} start hours for {kind.replace('_', '-')} gains, got {len(hours)}")
    if not _cyclic_hours(hours):
        raise InputError(f"{where} must be hours 0-24 in the order of the day, each period after the one before "
                         f"(the last may start after midnight), got {', '.join(f'{h:g}' for h in hours)}")
    if kind == "day_night":
        schedule["day_start_h"], schedule["night_start_h"] = hours
    else:
        schedule["starts_h"] = hours
    return schedule


def parse_gains_hours(value, where="gains hours"):
    """
    Start hours as a user gives them: a list of numbers, or a text ``9,12,20,2`` (``;`` too).

    Parameters
    ----------
    value : str or list
    where : str
        What gave them, for messages.

    Returns
    -------
    list of float
        [h], not yet checked against a gains model (:func:`gains_schedule` does that).

    Raises
    ------
    InputError
        Anything but numbers.
    """
    if isinstance(value, str):
        try:
            return [float(part) for part in value.replace(";", ",").split(",")]
        except ValueError:
            raise InputError(f"{where} {value!r}: expected hours separated by commas, e.g. 9,12,20,2") from None
    if not isinstance(value, (list, tuple)) or not all(isinstance(h, (int, float)) and not isinstance(h, bool)
                                                       for h in value):
        raise InputError(f"{where} is {value!r} (expected a list of start hours, e.g. [9, 12, 20, 2])")
    return [float(h) for h in value]


def _cyclic_hours(hours):
    """Whether start hours follow each other round the clock: each within 0-24, one lap in all."""
    if not all(isinstance(h, (int, float)) and not isinstance(h, bool) and 0 <= h < 24 for h in hours):
        return False
    gaps = [(b - a) % 24.0 for a, b in zip(hours, list(hours[1:]) + list(hours[:1]))]
    return all(g > 0 for g in gaps) and abs(sum(gaps) - 24.0) < 1e-9


def _clock(hour):
    """An hour of the day as ``06`` or ``22:30``."""
    minutes = int(round(hour * 60)) % 1440
    return f"{minutes // 60:02d}" + (f":{minutes % 60:02d}" if minutes % 60 else "")


def gains_periods(schedule):
    """
    Periods of a gains schedule.

    Parameters
    ----------
    schedule : dict
        A value of :data:`GAINS_SCHEDULES` (as stored in RESULT.json ``gains_schedule``).

    Returns
    -------
    starts_h : list of float
        Start of each period [h, local time] in the order of the day; empty for one constant level.
    parameters : list of str
        The gain parameter of each period (``internal_gains_w`` alone for a constant).
    """
    kind = schedule.get("kind", "constant")
    if kind == "constant":
        return [], ["internal_gains_w"]
    if kind == "day_night":
        return ([float(schedule.get("day_start_h", 7)), float(schedule.get("night_start_h", 23))],
                ["internal_gains_day_w", "internal_gains_night_w"])
    if kind == "four_period":
        return [float(h) for h in schedule["starts_h"]], [f"internal_gains_{n}_w" for n in schedule["names"]]
    raise ValueError(f"gains_schedule kind is {kind!r} (expected one of {', '.join(GAINS_SCHEDULES)})")


#: Internal-gain parameters a result may carry besides the network's own. [W]
GAIN_PARAMETERS = tuple(dict.fromkeys(name for schedule in GAINS_SCHEDULES.values() for name in gains_periods(schedule)[1]))


def gains_period_labels(index, schedule):
    """
    Which period of a gains schedule each stamp falls in.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        Stamps (their own local time decides).
    schedule : dict
        As for :func:`gains_periods`.

    Returns
    -------
    numpy.ndarray of int
        Position in :func:`gains_periods`' lists; all 0 for a constant.
    """
    starts, _ = gains_periods(schedule)
    if not starts:
        return np.zeros(len(index), dtype=np.int64)
    hours = np.asarray(index.hour + index.minute / 60.0, dtype=float)
    # The periods follow each other round the clock; the one whose start is latest in the
    # day also holds the hours before the earliest start.
    order = np.argsort(starts, kind="stable")
    at = (np.searchsorted(np.asarray(starts, dtype=float)[order], hours, side="right") - 1) % len(starts)
    return order[at].astype(np.int64)


@dataclass
class CalibrationResult:
    """
    What a calibration found, in SI units.

    Attributes
    ----------
    model : str
        Preset name (``"1R1C"``, ``"2R2C"``, ``"3R2C"``, ``"4R3C"``).
    parameters : dict
        Parameter name -> value: the preset's R [K W⁻¹], C [J K⁻¹], solar aperture [m²] and
        share, plus internal gains [W] (``internal_gains_w``, or the day/night pair) and
        ``sensor_time_constant_s``, the first-order lag through which the log's sensor reads
        the indoor node (0 for none) [s].
    heat_loss_coefficient_w_per_k : float
        Steady-state UA seen from the indoor node. [W K⁻¹]
    time_constants_h : list of float
        Relaxation times, descending. [h]
    capacitance_j_per_k : float
        Sum of node heat capacities. [J K⁻¹]
    fit : dict
        Fit metrics: ``rmse_k``, ``bias_k``, ``cv_rmse_pct``, ``nmbe_pct``, ``n_samples``...
    warnings : list of str
        Plain-words warnings, repeated from the calibration.
    std_errors : dict
        Parameter or derived quantity -> standard error (same unit as the value).
    intervals : dict
        Name -> ``[low, high]`` 95 % interval.
    covariance : dict or None
        ``{"names": [...], "space": "log", "matrix": [[...]]}``: covariance of the natural
        logarithms of the positive parameters (how the fit works), or ``None``.
    gains_schedule : dict
        A value of :data:`GAINS_SCHEDULES`: ``{"kind": "constant"}``, ``{"kind": "day_night",
        "day_start_h": 7, "night_start_h": 23}`` or ``{"kind": "four_period", "starts_h": [6, 9,
        17, 23], "names": [...]}`` (local time of the site).
    solar_input : str
        Which irradiance the aperture multiplies (``"ghi_w_m2"``: global horizontal).
    solar_weights : dict
        Façade weights (``n``, ``e``, ``s``, ``w``, mean 1) of the vertical solar input, from a
        construction's windows; empty for the plain sum of the four façades.
    site : dict
        ``latitude``, ``longitude``, ``tz`` where known.
    step_s : float
        Model step used in calibration. [s]
    ground : dict
        Empty when the heat loss is all to outdoor air; otherwise ``temperature_c`` (the
        constant ground temperature given) [°C], ``share`` (of every outdoor conductance that
        goes to the ground) and the split ``ua_outdoor_w_per_k``, ``ua_ground_w_per_k``
        [W K⁻¹]. The network then has a second boundary ``ground_c``
        (:func:`thermorc.network.with_ground`).
    extras : dict
        Anything else worth keeping (model comparison, diagnostics, provenance).
    """

    model: str
    parameters: dict
    heat_loss_coefficient_w_per_k: float = math.nan
    time_constants_h: list = field(default_factory=list)
    capacitance_j_per_k: float = math.nan
    fit: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    std_errors: dict = field(default_factory=dict)
    intervals: dict = field(default_factory=dict)
    covariance: dict | None = None
    gains_schedule: dict = field(default_factory=lambda: {"kind": "constant"})
    solar_input: str = "ghi_w_m2"
    solar_weights: dict = field(default_factory=dict)
    site: dict = field(default_factory=dict)
    step_s: float = 300.0
    ground: dict = field(default_factory=dict)
    extras: dict = field(default_factory=dict)

    # -- the model -------------------------------------------------------------------------
    def network(self, parameters=None) -> Network:
        """
        Rebuild the calibrated network.

        Parameters
        ----------
        parameters : dict, optional
            Replacement values (e.g. a Monte Carlo draw); default: the calibrated ones.

        Returns
        -------
        Network
        """
        values = dict(self.parameters if parameters is None else parameters)
        allowed = set(preset_parameters(self.model))
        net = Network.from_preset(self.model, {k: v for k, v in values.items() if k in allowed})
        return with_ground(net, self.ground["share"]) if self.ground else net

    def boundary_inputs(self, index):
        """
        The network's boundary temperatures besides outdoor over an index.

        Parameters
        ----------
        index : pandas.DatetimeIndex

        Returns
        -------
        dict
            ``{"ground_c": pandas.Series}`` (the constant ground temperature) [°C] when the
            result has a ground path, else empty.
        """
        if not self.ground:
            return {}
        return {GROUND: pd.Series(float(self.ground["temperature_c"]), index=index, name=GROUND)}

    def internal_gains_w(self, index, parameters=None):
        """
        Unlogged internal gains over an index, from the calibrated gain model.

        Parameters
        ----------
        index : pandas.DatetimeIndex
            Stamps (tz-aware; the day/night split uses the index's own local time).
        parameters : dict, optional
            Replacement values; default: the calibrated ones.

        Returns
        -------
        pandas.Series
            Mean internal gain over each interval. [W]
        """
        p = self.parameters if parameters is None else parameters
        _, names = gains_periods(self.gains_schedule)
        levels = np.array([float(p.get(name, 0.0)) for name in names])
        return pd.Series(levels[gains_period_labels(index, self.gains_schedule)], index=index, name="internal_w")

    def parameter_draws(self, n_draws, seed=0):
        """
        Random parameter sets from the calibration's covariance (Monte Carlo).

        Parameters
        ----------
        n_draws : int
            How many draws.
        seed : int
            Seed of ``numpy.random.default_rng``, for reproducible results.

        Returns
        -------
        list of dict
            Parameter dicts like :attr:`parameters`. Positive parameters are drawn as
            log-normal (the fit's own parameterisation), so every draw is physical.

        Raises
        ------
        ValueError
            When the result has no usable covariance.
        """
        cov = self.covariance or {}
        names = cov.get("names") or []
        matrix = np.asarray(cov.get("matrix") or [], dtype=float)
        if not names or matrix.shape != (len(names), len(names)) or not np.all(np.isfinite(matrix)):
            raise ValueError("this calibration result has no usable parameter covariance")
        rng = np.random.default_rng(seed)
        centre = np.array([self.parameters[n] for n in names], dtype=float)
        log_space = cov.get("space", "log") == "log"
        mean = np.log(centre) if log_space else centre
        # Eigen-decomposition tolerates a covariance that is only positive semi-definite.
        vals, vecs = np.linalg.eigh(0.5 * (matrix + matrix.T))
        root = vecs * np.sqrt(np.clip(vals, 0, None))
        draws = mean + rng.standard_normal((int(n_draws), len(names))) @ root.T
        if log_space:
            draws = np.exp(draws)
        out = []
        for row in draws:
            p = dict(self.parameters)
            p.update({n: float(v) for n, v in zip(names, row)})
            out.append(p)
        return out

    # -- files -----------------------------------------------------------------------------
    def to_dict(self):
        """The RESULT.json content as plain Python types."""
        return {
            "format": RESULT_FORMAT,
            "model": self.model,
            "parameters": {k: float(v) for k, v in self.parameters.items()},
            "heat_loss_coefficient_w_per_k": float(self.heat_loss_coefficient_w_per_k),
            "time_constants_h": [float(t) for t in self.time_constants_h],
            "capacitance_j_per_k": float(self.capacitance_j_per_k),
            "fit": self.fit,
            "warnings": list(self.warnings),
            "std_errors": self.std_errors,
            "intervals": self.intervals,
            "covariance": self.covariance,
            "gains_schedule": self.gains_schedule,
            "solar_input": self.solar_input,
            "site": self.site,
            "step_s": float(self.step_s),
            **({"ground": self.ground} if self.ground else {}),
            **({"solar_weights": self.solar_weights} if self.solar_weights else {}),
            **self.extras,
        }

    @classmethod
    def from_dict(cls, data, path=None):
        """
        Rebuild a result from :meth:`to_dict` output, checking what the model needs.

        Parameters
        ----------
        data : dict
            Parsed RESULT.json.
        path : str, optional
            File name for error messages.

        Returns
        -------
        CalibrationResult
        """
        if not isinstance(data, dict):
            raise InputError("expected a JSON object at the top level", path=path)
        model = data.get("model")
        if not isinstance(model, str) or model.upper() not in PRESETS:
            raise InputError(
                f"'model' is {model!r} (expected one of {', '.join(PRESETS)})", path=path, column="model"
            )
        params = data.get("parameters")
        if not isinstance(params, dict):
            raise InputError("'parameters' is missing or not an object", path=path, column="parameters")
        clean = {}
        for key, value in params.items():
            if isinstance(value, int) and abs(value) > 1e300:  # a JSON integer beyond the float range
                value = math.inf
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise InputError(f"{value!r} is not a finite number", path=path, column=f"parameters.{key}")
            if abs(value) > _PARAMETER_LIMIT:
                raise InputError(f"{value!r} is beyond any home (expected a magnitude up to {_PARAMETER_LIMIT:g})",
                                 path=path, column=f"parameters.{key}")
            clean[key] = float(value)
        _check_file_fields(data, clean, path)
        needed = PRESETS[model.upper()].parameters
        missing = [p for p in needed if p not in clean]
        if missing:
            raise InputError(f"model {model} needs parameter(s) {missing}", path=path, column="parameters")
        known = {
            "format", "model", "parameters", "heat_loss_coefficient_w_per_k", "time_constants_h",
            "capacitance_j_per_k", "fit", "warnings", "std_errors", "intervals", "covariance",
            "gains_schedule", "solar_input", "site", "step_s", "ground", "solar_weights",
        }
        result = cls(
            model=model.upper(),
            parameters=clean,
            heat_loss_coefficient_w_per_k=_number(data.get("heat_loss_coefficient_w_per_k")),
            time_constants_h=list(data.get("time_constants_h") or []),
            capacitance_j_per_k=_number(data.get("capacitance_j_per_k")),
            fit=dict(data.get("fit") or {}),
            warnings=[str(w) for w in (data.get("warnings") or [])],
            std_errors=dict(data.get("std_errors") or {}),
            intervals=dict(data.get("intervals") or {}),
            covariance=data.get("covariance"),
            gains_schedule=dict(data.get("gains_schedule") or {"kind": "constant"}),
            solar_input=str(data.get("solar_input") or "ghi_w_m2"),
            site=dict(data.get("site") or {}),
            step_s=_number(data.get("step_s"), 300.0),
            ground=_ground(data.get("ground"), path),
            solar_weights=_solar_weights(data.get("solar_weights"), path),
            extras={k: v for k, v in data.items() if k not in known},
        )
        kind = result.gains_schedule.get("kind")
        if kind not in GAINS_SCHEDULES:
            raise InputError(f"gains_schedule kind is {kind!r} (expected one of {', '.join(GAINS_SCHEDULES)})",
                             path=path, column="gains_schedule")
        if kind == "day_night":
            hours = [result.gains_schedule.get(k, d) for k, d in (("day_start_h", 7), ("night_start_h", 23))]
            if not _cyclic_hours(hours):
                raise InputError("expected 'day_start_h' and 'night_start_h' as two different hours 0-24", path=path,
                                 column="gains_schedule")
        if kind == "four_period":
            starts, names = result.gains_schedule.get("starts_h"), result.gains_schedule.get("names")
            ok = (isinstance(starts, list) and isinstance(names, list) and len(starts) == len(names) >= 2
                  and _cyclic_hours(starts) and all(isinstance(n, str) for n in names))
            if not ok:
                raise InputError("expected 'starts_h' (hours 0-24 in the order of the day) and as many 'names'",
                                 path=path, column="gains_schedule")
        if kind != "constant":
            for key in gains_periods(result.gains_schedule)[1]:
                if key not in clean:
                    raise InputError(f"{'day/night' if kind == 'day_night' else 'four-period'} internal gains need '{key}'", path=path, column="parameters")
        try:
            result.network()
        except InputError as exc:
            raise InputError(exc.message, path=path, column="parameters") from None
        return result

    @classmethod
    def from_json(cls, path):
        """
        Read a RESULT.json file.

        Parameters
        ----------
        path : str or os.PathLike
            The file.

        Returns
        -------
        CalibrationResult

        Raises
        ------
        InputError
            Unreadable file, invalid JSON (with its line), or missing keys.
        """
        try:
            with open(path, "rb") as handle:
                raw = handle.read()
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("is not UTF-8 text (expected a RESULT.json written by thermorc)", path=path) from None
        except IsADirectoryError:
            raise InputError("is a directory (expected a RESULT.json file)", path=path) from None
        except FileNotFoundError:
            raise InputError("no such file", path=path) from None
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"invalid JSON: {exc.msg}", path=path, row=exc.lineno) from None
        return cls.from_dict(data, path=str(path))

    def gains_period_hours(self):
        """
        The local hours of each gains period, for labels.

        Returns
        -------
        dict
            Gain parameter -> ``"20-02 h"``; empty for one constant level.
        """
        starts, keys = gains_periods(self.gains_schedule)
        return {key: f"{_clock(starts[i])}-{_clock(starts[(i + 1) % len(starts)])} h"
                for i, key in enumerate(keys) if starts}

    def summary(self):
        """A short plain-text summary for people (units in the labels)."""

        def interval(key, scale=1.0, fmt="{:.1f}"):
            lo, hi = (self.intervals.get(key) or [math.nan, math.nan])[:2]
            if lo is None or hi is None or not (math.isfinite(lo) and math.isfinite(hi)):
                return ""
            return f"  (95 % interval {fmt.format(lo * scale)} to {fmt.format(hi * scale)})"

        comparison = self.extras.get("model_comparison", {})
        compared = ", ".join(r["model"] for r in comparison.get("rows", []))
        lines = [f"model                   {self.model}" + (f"  (chosen by comparing {compared})"
                                                           if comparison.get("chosen") else "")]
        lines.append(
            f"heat loss coefficient   {self.heat_loss_coefficient_w_per_k:.1f} W/K"
            + interval("heat_loss_coefficient_w_per_k")
        )
        if self.ground:
            g = self.ground
            lines.append(f"                        of which {g['ua_outdoor_w_per_k']:.1f} W/K to outdoor air and "
                         f"{g['ua_ground_w_per_k']:.1f} W/K to the ground at {g['temperature_c']:.1f} °C (share given)")
        for i, tau in enumerate(self.time_constants_h):
            label = "time constants" if i == 0 else ""
            lines.append(f"{label:<24}{tau:.1f} h" + interval(f"time_constant_{i + 1}_h"))
        lines.append(f"total heat capacity     {self.capacitance_j_per_k / 1e6:.1f} MJ/K")
        aperture = self.parameters.get("solar_aperture_m2")
        if aperture:
            lines.append(f"solar aperture          {aperture:.2f} m² on {self.solar_input}" + interval("solar_aperture_m2", fmt="{:.2f}"))
        hours = self.gains_period_hours()
        for key in gains_periods(self.gains_schedule)[1]:
            if key in self.parameters:
                label = "unlogged gains" + ("" if key == "internal_gains_w" else ", " + key[len("internal_gains_"):-2])
                lines.append(f"{label:<24}{self.parameters[key]:.0f} W" + (f" ({hours[key]})" if key in hours else ""))
        lag = self.parameters.get("sensor_time_constant_s", 0.0)
        if lag > 0:
            lines.append(f"{'sensor lag':<24}{lag / 60:.1f} min (first-order, fitted to the samples)")
        fit = self.fit
        if fit:
            lines.append(
                f"fit                     indoor temperature RMSE {fit.get('rmse_k', math.nan):.3f} K, "
                f"bias {fit.get('bias_k', math.nan):+.3f} K, {fit.get('n_samples', 0)} samples"
            )
            cv, nmbe = fit.get("cv_rmse_pct"), fit.get("nmbe_pct")
            if isinstance(cv, float) and math.isfinite(cv):
                verdict = "meets" if cv <= 30.0 and abs(nmbe) <= 10.0 else "misses"
                lines.append(
                    f"                        hourly heating energy CV(RMSE) {cv:.1f} % (limit 30 %), NMBE {nmbe:+.1f} % "
                    f"(limit ±10 %): {verdict} ASHRAE Guideline 14"
                )
        val = self.extras.get("validation")
        if isinstance(val, dict) and isinstance(val.get("rmse_k"), (int, float)):
            lines.append(
                f"validation              {str(val.get('start', '?'))[:16]} on, not fitted: indoor temperature RMSE "
                f"{val['rmse_k']:.3f} K, bias {val.get('bias_k', math.nan):+.3f} K, {val.get('n_samples', 0)} samples"
            )
            cv, nmbe = val.get("cv_rmse_pct"), val.get("nmbe_pct")
            if isinstance(cv, float) and math.isfinite(cv) and isinstance(nmbe, float) and math.isfinite(nmbe):
                lines.append(f"                        hourly heating energy CV(RMSE) {cv:.1f} %, NMBE {nmbe:+.1f} %")
        return "\n".join(lines)


#: Largest magnitude of a stored parameter: far above any home's capacitance [J/K], resistance,
#: aperture or gains, and far below float overflow in the products the models form.
_PARAMETER_LIMIT = 1e15


def _check_file_fields(data, params, path):
    """Refuse a damaged ``step_s``, ``site`` or ``covariance`` instead of using a default silently."""
    step = data.get("step_s")
    if step is not None and (isinstance(step, bool) or not isinstance(step, (int, float))
                             or not (math.isfinite(step) and 0 < step <= 86400)):
        raise InputError(f"{step!r} is not a model step (expected seconds, 0 < step_s <= 86400)", path=path,
                         column="step_s")
    if data.get("site") is not None and not isinstance(data["site"], dict):
        raise InputError(f"{data['site']!r} is not an object (expected latitude, longitude, tz)", path=path,
                         column="site")
    cov = data.get("covariance")
    if cov is None:
        return
    names = cov.get("names") if isinstance(cov, dict) else None
    matrix = cov.get("matrix") if isinstance(cov, dict) else None
    if not isinstance(names, list) or any(n not in params for n in names if isinstance(n, str)) or not all(
            isinstance(n, str) for n in names):
        raise InputError("'names' must list parameters of the model", path=path, column="covariance.names")
    # Null entries are NaN written as JSON null: a covariance the fit could not estimate.
    ok = isinstance(matrix, list) and len(matrix) == len(names) and all(
        isinstance(r, list) and len(r) == len(names)
        and all(v is None or (isinstance(v, (int, float)) and not isinstance(v, bool)) for v in r) for r in matrix)
    if not ok:
        raise InputError(f"'matrix' must be {len(names)} x {len(names)} numbers, one row and column per name",
                         path=path, column="covariance.matrix")


def _solar_weights(value, path):
    """The ``solar_weights`` record of a RESULT.json, checked; empty when there is none."""
    if value is None or value == {}:
        return {}
    if not isinstance(value, dict) or set(value) != set("nesw"):
        raise InputError(f"{value!r} is not a weight for each of n, e, s, w", path=path, column="solar_weights")
    out = {}
    for key in "nesw":
        v = value[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (math.isfinite(v) and 0 <= v <= 4):
            raise InputError(f"{v!r} is not a façade weight (expected 0..4)", path=path, column=f"solar_weights.{key}")
        out[key] = float(v)
    return out


def _ground(value, path):
    """The ``ground`` record of a RESULT.json, checked; empty when there is none."""
    if value is None or value == {}:
        return {}
    where = {"path": path, "column": "ground"}
    if not isinstance(value, dict):
        raise InputError(f"{value!r} is not an object (expected temperature_c and share)", **where)
    out = {}
    for key in ("temperature_c", "share", "ua_outdoor_w_per_k", "ua_ground_w_per_k"):
        v = value.get(key)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise InputError(f"{v!r} is not a finite number", path=path, column=f"ground.{key}")
        out[key] = float(v)
    if not 0.0 <= out["share"] < 1.0:
        raise InputError(f"{out['share']:g} is not a share (expected 0 <= share < 1)", path=path, column="ground.share")
    return out


def _number(value, default=math.nan):
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    return default
