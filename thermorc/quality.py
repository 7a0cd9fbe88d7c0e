"""
Data-quality report of a log, ending in a verdict on which model order it can identify.

The verdict rules are thermorc's own rules of thumb (common practice in grey-box building
identification, not a published standard): a model can only be identified from data that
(a) span several time constants of the mode it describes, (b) are sampled fast enough to see
the fast mode, and (c) are excited: the heating switches, the room cools freely for hours, the
outdoor temperature moves. The thresholds are listed in :data:`REQUIREMENTS` and in
``docs/data-formats.md`` so a user can see why a verdict was reached.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from thermorc.align import AlignedData, align
from thermorc.errors import InputError

__all__ = ["MODEL_ORDERS", "EXTRA_ORDERS", "REQUIREMENTS", "QualityReport", "inspect_log", "require_model"]

MODEL_ORDERS = ("1R1C", "2R2C", "3R2C")

# Minimum evidence per order (thermorc's own thresholds; common practice):
#   observed_days   days of observed (non-gap) data
#   max_step_s      model grid step small enough to see the fast (interior-air) mode
#   free_float      periods with the heating off for 2 h or more
#   switches_per_day heating on/off transitions per observed day
#   outdoor_std_k   outdoor temperature variation (separates the envelope paths)
REQUIREMENTS = {
    "1R1C": {"observed_days": 3.0, "max_step_s": 3600.0, "free_float": 0, "switches_per_day": 0.0,
             "outdoor_std_k": 0.0},
    "2R2C": {"observed_days": 7.0, "max_step_s": 1800.0, "free_float": 3, "switches_per_day": 1.0,
             "outdoor_std_k": 0.0},
    "3R2C": {"observed_days": 14.0, "max_step_s": 900.0, "free_float": 5, "switches_per_day": 1.0,
             "outdoor_std_k": 3.0},
    # Off the ladder (the verdict never names it, auto never fits it): the interior-mass mode
    # runs to 200-300 h in heavy homes, and three weeks hold about two e-folds of it.
    "4R3C": {"observed_days": 21.0, "max_step_s": 900.0, "free_float": 5, "switches_per_day": 1.0,
             "outdoor_std_k": 3.0},
}
#: Orders :func:`require_model` accepts beyond the ladder, each with the order it builds on.
EXTRA_ORDERS = {"4R3C": "3R2C"}
FREE_FLOAT_S = 2 * 3600.0
# Heating counts as "on" above this fraction of its 99th-percentile power, or 50 W (common
# practice: standby draw and pilot lights are not heating).
ON_FRACTION = 0.05
#: Duty cycle below which the report warns that the heating did too little of the heating to
#: give UA its scale (our choice; the calibration's own test is the heating share of the heat,
#: docs/calibration.md).
LOW_DUTY = 0.05


@dataclasses.dataclass
class QualityReport:
    """Figures about a log and the verdict; see :func:`inspect_log`."""

    span: dict
    step: dict
    coverage: float
    gaps: dict
    heating: dict
    temperatures: dict
    free_float: dict
    excitation: dict
    flags: list
    notes: list
    supported: list
    verdict: str
    reasons: list

    @property
    def highest_order(self):
        """The highest model order the data supports, or None."""
        return self.supported[-1] if self.supported else None

    def to_dict(self):
        """Plain JSON-ready dict (timestamps as ISO 8601 text)."""
        def clean(obj):
            if isinstance(obj, dict):
                return {k: clean(v) for k, v in obj.items()}
            if isinstance(obj, (list, tuple)):
                return [clean(v) for v in obj]
            if isinstance(obj, pd.Timestamp):
                return obj.isoformat()
            if isinstance(obj, (np.floating, np.integer)):
                return obj.item()
            return obj
        out = clean(dataclasses.asdict(self))
        out["highest_order"] = self.highest_order
        return out

    def to_text(self):
        """Human-readable report, one fact per line."""
        s, st, h, tm, ff, ex, g = (self.span, self.step, self.heating, self.temperatures, self.free_float,
                                    self.excitation, self.gaps)
        lines = [
            f"span        {s['start']} to {s['end']} ({s['days']:.2f} days)",
            f"step        input {st['input_s']:g} s, grid {st['grid_s']:g} s",
            f"coverage    {100 * self.coverage:.1f} % of grid rows observed; {g['count']} gap(s), "
            f"longest {g['longest_h']:.2f} h; {g['segments']} segment(s)",
            f"heating     duty cycle {100 * h['duty_cycle']:.1f} %, mean {h['mean_w']:.0f} W, "
            f"peak {h['max_w']:.0f} W",
        ]
        for name, r in tm.items():
            lines.append(f"{name:<11} {r['min']:.1f} to {r['max']:.1f} degC (mean {r['mean']:.1f})")
        lines.append(f"free float  {ff['count']} period(s) of heating off >= 2 h, {ff['hours']:.1f} h in all, "
                     f"longest {ff['longest_h']:.1f} h")
        lines.append(f"excitation  {ex['switches_per_day']:.1f} heating switches/day, heating CV "
                     f"{ex['heating_cv']:.2f}, indoor-outdoor difference {ex['mean_delta_t_k']:.1f} K"
                     + (f", outdoor std {ex['outdoor_std_k']:.1f} K" if ex['outdoor_std_k'] is not None else ""))
        for flag in self.flags:
            lines.append(f"flag        {flag}")
        lines.append(f"verdict     {self.verdict}")
        for reason in self.reasons:
            lines.append(f"            - {reason}")
        return "\n".join(lines)


def _skipna(reduce, v):
    """``reduce`` (numpy's nanmin, nanmax, nanmean) of ``v``; NaN, as pandas gives, when all is NaN."""
    return float(reduce(v)) if not np.isnan(v).all() else float("nan")


def _runs(mask):
    change = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    return np.flatnonzero(change == 1), np.flatnonzero(change == -1)


def inspect_log(frame_or_aligned, step_s=None, has_weather=False):
    """
    Measure a log and decide which model order it can identify.

    Parameters
    ----------
    frame_or_aligned : pandas.DataFrame or AlignedData
        Output of :func:`thermorc.read.read_log` (aligned here) or of
        :func:`thermorc.align.align`.
    step_s : float, optional
        Grid step for a raw frame [s]; default: the input's median spacing, at least 60 s.
    has_weather : bool
        Whether outdoor temperature will come from a weather file when the log has none.

    Returns
    -------
    QualityReport
    """
    if isinstance(frame_or_aligned, AlignedData):
        al = frame_or_aligned
    else:
        frame = frame_or_aligned
        if step_s is None:
            if not isinstance(frame.index, pd.DatetimeIndex) or len(frame) < 3:
                raise InputError("expected at least 3 rows on a DatetimeIndex")
            step_s = max(float(np.median(np.diff(frame.index.as_unit("ns").asi8)) / 1e9), 60.0)
        al = align(frame, step_s)
    d = al.data
    step = al.step_s
    gap = al.gap_mask.to_numpy()
    n = len(d)
    observed_days = float((~gap).sum() * step / 86400.0)
    g_start, g_end = _runs(gap)
    gap_lengths_h = (g_end - g_start) * step / 3600.0
    heat = d["heating_w"].to_numpy(dtype=float)
    hv = heat[~np.isnan(heat)]
    p99 = float(np.percentile(hv, 99)) if hv.size else 0.0
    on_level = max(ON_FRACTION * p99, 50.0)
    on = heat > on_level
    valid = ~np.isnan(heat)
    duty = float(on[valid].mean()) if valid.any() else 0.0
    switches = int(np.sum((on[1:] != on[:-1]) & valid[1:] & valid[:-1]))
    # Free-floating: heating off (and observed) for FREE_FLOAT_S or more.
    off = valid & ~on
    f_start, f_end = _runs(off)
    f_len_s = (f_end - f_start) * step
    long_off = f_len_s >= FREE_FLOAT_S
    # Column statistics skip NaN as pandas' Series.min, max, mean and std (ddof=1) do, on the
    # arrays themselves (numpy's nan-functions give the same sums in the same order).
    columns = {col: d[col].to_numpy(dtype=float) for col in ("indoor_c", "outdoor_c", "setpoint_c") if col in d}
    temps = {}
    for col, v in columns.items():
        if not np.isnan(v).all():
            temps[col] = {"min": float(np.nanmin(v)), "max": float(np.nanmax(v)), "mean": float(np.nanmean(v))}
    indoor = columns["indoor_c"]
    outdoor = columns.get("outdoor_c")
    outdoor_std = float(np.nanstd(outdoor, ddof=1)) if outdoor is not None and np.sum(~np.isnan(outdoor)) > 1 else None
    delta = _skipna(np.nanmean, indoor - outdoor) if outdoor is not None else float("nan")
    heat_cv = float(np.std(hv) / np.mean(hv)) if hv.size and np.mean(hv) > 0 else 0.0
    per_day = switches / observed_days if observed_days > 0 else 0.0
    excitation = {"switches_per_day": per_day, "heating_cv": heat_cv, "mean_delta_t_k": delta,
                  "outdoor_std_k": outdoor_std, "indoor_range_k": _skipna(np.nanmax, indoor) - _skipna(np.nanmin, indoor)}
    facts = {
        "observed_days": observed_days, "step_s": step, "free_float": int(long_off.sum()),
        "switches_per_day": per_day, "outdoor_std_k": outdoor_std if outdoor_std is not None else 0.0,
    }
    supported, reasons = [], []
    basic = []
    if "outdoor_c" not in d and not has_weather:
        basic.append("no outdoor temperature in the log and no weather file")
    if hv.size == 0 or np.ptp(hv) <= 0:
        basic.append("the heating power never changes, so heat input and heat loss cannot be told apart")
    if excitation["indoor_range_k"] < 0.5:
        basic.append(f"the indoor temperature moves only {excitation['indoor_range_k']:.2f} K")
    reasons.extend(basic)
    if not basic:
        for order in MODEL_ORDERS:
            need = REQUIREMENTS[order]
            missing = _unmet(order, need, facts)
            if missing:
                reasons.extend(missing)
                break
            supported.append(order)
    if supported:
        verdict = f"the data can identify models up to {supported[-1]}"
        if supported[-1] != MODEL_ORDERS[-1]:
            verdict += f" (not {MODEL_ORDERS[MODEL_ORDERS.index(supported[-1]) + 1]})"
    else:
        verdict = "the data cannot identify an RC model"
    return QualityReport(
        span={"start": d.index[0], "end": d.index[-1] + pd.Timedelta(seconds=step),
              "days": n * step / 86400.0, "observed_days": observed_days},
        step={"input_s": al.input_step_s, "grid_s": step},
        coverage=al.coverage,
        gaps={"count": int(g_start.size), "longest_h": float(gap_lengths_h.max()) if g_start.size else 0.0,
              "hours": float(gap_lengths_h.sum()), "segments": len(al.segments),
              "largest": [{"start": d.index[s], "hours": float((e - s) * step / 3600.0)}
                          for s, e in sorted(zip(g_start, g_end), key=lambda se: se[0] - se[1])[:10]]},
        heating={"duty_cycle": duty, "mean_w": float(np.mean(hv)) if hv.size else 0.0, "max_w": float(hv.max())
                 if hv.size else 0.0, "on_threshold_w": on_level, "switches": switches},
        temperatures=temps,
        free_float={"count": int(long_off.sum()), "hours": float(f_len_s[long_off].sum() / 3600.0),
                    "longest_h": float(f_len_s.max() / 3600.0) if f_len_s.size else 0.0},
        excitation=excitation,
        flags=list(al.flags) + ([
            f"the heating ran only {100 * duty:.1f} % of the time: with so little metered heat the sun and the "
            "occupants did most of the heating, and the heat loss coefficient may not be identifiable; a colder "
            "stretch of log is better"] if hv.size and duty < LOW_DUTY else []),
        notes=list(al.notes),
        supported=supported,
        verdict=verdict,
        reasons=reasons,
    )


def _unmet(order, need, facts):
    out = []
    if facts["observed_days"] < need["observed_days"]:
        out.append(f"{order} needs {need['observed_days']:g} observed days, the log has {facts['observed_days']:.1f}")
    if facts["step_s"] > need["max_step_s"]:
        out.append(f"{order} needs a step of {need['max_step_s']:g} s or less, the grid has {facts['step_s']:g} s")
    if facts["free_float"] < need["free_float"]:
        out.append(f"{order} needs {need['free_float']} free-floating periods (heating off >= 2 h), "
                   f"the log has {facts['free_float']}")
    if facts["switches_per_day"] < need["switches_per_day"]:
        out.append(f"{order} needs {need['switches_per_day']:g} heating switches per day, the log has "
                   f"{facts['switches_per_day']:.2f}")
    if facts["outdoor_std_k"] < need["outdoor_std_k"]:
        out.append(f"{order} needs outdoor temperature variation (std) of {need['outdoor_std_k']:g} K, "
                   f"the log has {facts['outdoor_std_k']:.1f} K")
    return out


def require_model(report, model, path=None):
    """
    Refuse data that cannot identify ``model``.

    Parameters
    ----------
    report : QualityReport
    model : {'1R1C', '2R2C', '3R2C', '4R3C'}
        A model off the ladder (4R3C) must first meet the requirements of the order it builds
        on (:data:`EXTRA_ORDERS`), then its own.
    path : str, optional
        The log, for the message.

    Raises
    ------
    thermorc.errors.InputError
        "too little data for 2R2C: ..." with the first unmet requirement.
    """
    if model in EXTRA_ORDERS:
        require_model(report, EXTRA_ORDERS[model], path=path)
        facts = {"observed_days": report.span["observed_days"], "step_s": report.step["grid_s"],
                 "free_float": report.free_float["count"],
                 "switches_per_day": report.excitation["switches_per_day"],
                 "outdoor_std_k": report.excitation["outdoor_std_k"] or 0.0}
        missing = _unmet(model, REQUIREMENTS[model], facts)
        if missing:
            raise InputError(f"too little data for {model}: {missing[0]}", path=path)
        return
    if model not in MODEL_ORDERS:
        raise InputError(f"unknown model {model!r} (expected one of {', '.join(MODEL_ORDERS + tuple(EXTRA_ORDERS))})")
    if model in report.supported:
        return
    why = next((r for r in report.reasons if r.startswith(model)), None) or (report.reasons[0] if report.reasons
                                                                              else report.verdict)
    raise InputError(f"too little data for {model}: {why}", path=path)
