"""
Cleaning and alignment: a log becomes a uniform grid with a gap mask and restart segments.

Two kinds of columns are treated differently (the interval convention of thermorc):

* interval means (``heating_w``, ``internal_gains_w``, ``ghi_w_m2`` and weather irradiance):
  the value is the mean over the interval STARTING at its stamp, so a new interval's value is
  the exact time-weighted mean of the piecewise-constant input over it;
* instants (temperatures, wind): linear interpolation in time between the two neighbouring
  readings.

Neither is ever bridged across a gap longer than ``max_gap_s``; see :func:`align` for the
default. Grid rows that are not observed are NaN and True in ``gap_mask``, and the observed
runs are listed as ``segments`` so later stages can restart their filters there.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pandas as pd

from thermorc.errors import DataQualityWarning, InputError
from thermorc.read import INTERVAL_MEAN_COLUMNS

__all__ = ["AlignedData", "align", "align_weather", "interval_means", "instants", "SPIKE_THRESHOLDS_K"]

# A reading that jumps away from BOTH neighbours by more than this and comes straight back is a
# spike, not weather or heating (common practice; thermorc's own thresholds, in kelvin).
SPIKE_THRESHOLDS_K = {"indoor_c": 3.0, "outdoor_c": 8.0, "setpoint_c": 100.0}
# A temperature that does not change at all for this long while the heating changes is a
# stuck sensor or a stale value repeated by the logger (common practice).
STUCK_S = 6 * 3600.0
# ... for a reading with steps of this size or finer; a coarser reading (whole degrees
# Fahrenheit, a weather feed in whole kelvin) holds one value longer in proportion, so the
# time scales with its step (thermorc's own rule).
STUCK_RESOLUTION_K = 0.2


@dataclasses.dataclass
class AlignedData:
    """
    A log on a uniform grid.

    Attributes
    ----------
    data : pandas.DataFrame
        Uniform tz-aware index with ``freq`` set; NaN where not observed.
    gap_mask : pandas.Series of bool
        True where any column of ``data`` is not observed: NaN (a hole longer than
        ``max_gap_s``) or filled across a short hole (value kept, interpolated or held).
    segments : list of (pandas.Timestamp, pandas.Timestamp)
        First and last stamp of each run of observed rows, in time order.
    step_s : float
        Grid step [s].
    max_gap_s : float
        Longest hole bridged by interpolation [s].
    observed : pandas.DataFrame of bool
        Per column: True where observed (not NaN and not filled).
    input_step_s : float
        Median spacing of the input [s].
    spikes : dict
        Column -> number of input readings removed as spikes.
    stuck : list of dict
        Runs of a constant reading: column, start, end, hours.
    notes : list of str
        Repairs and decisions.
    flags : list of str
        Things a user should look at (spikes, stuck sensor).
    """

    data: pd.DataFrame
    gap_mask: pd.Series
    segments: list
    step_s: float
    max_gap_s: float
    observed: pd.DataFrame
    input_step_s: float
    spikes: dict = dataclasses.field(default_factory=dict)
    stuck: list = dataclasses.field(default_factory=list)
    notes: list = dataclasses.field(default_factory=list)
    flags: list = dataclasses.field(default_factory=list)

    @property
    def coverage(self):
        """Fraction of grid rows with every column observed [-]."""
        return float(1.0 - self.gap_mask.mean()) if len(self.gap_mask) else 0.0


def _seconds(index):
    ns = index.as_unit("ns").asi8
    return (ns - ns[0]) / 1e9, int(ns[0])


def interval_means(t_s, values, dur_s, edges_s, min_coverage=0.5):
    """
    Exact time-weighted means of a piecewise-constant signal over new intervals.

    Sample ``i`` holds ``values[i]`` over ``[t_s[i], t_s[i] + dur_s[i])``; NaN samples and the
    time between one sample's end and the next start are not observed.

    Parameters
    ----------
    t_s : numpy.ndarray
        Sample start times [s], increasing.
    values : numpy.ndarray
        Sample values (NaN = missing).
    dur_s : numpy.ndarray
        Durations [s], with ``t_s[i] + dur_s[i] <= t_s[i + 1]``.
    edges_s : numpy.ndarray
        Edges of the new intervals [s], increasing (n + 1 edges for n intervals).
    min_coverage : float
        Fraction of a new interval that must be observed for a value [-].

    Returns
    -------
    means : numpy.ndarray
        Mean over each new interval, NaN when under-covered.
    coverage : numpy.ndarray
        Observed fraction of each new interval [-].
    """
    ok = ~np.isnan(values)
    inc_c = np.where(ok, dur_s, 0.0)
    inc_e = np.where(ok, values, 0.0) * inc_c
    cum_c = np.cumsum(inc_c)
    cum_e = np.cumsum(inc_e)
    # The cumulative integrals are linear within a sample and flat between samples, so linear
    # interpolation of them at the new edges is exact.
    x = np.empty(2 * t_s.size)
    x[0::2], x[1::2] = t_s, t_s + dur_s
    yc = np.empty_like(x)
    ye = np.empty_like(x)
    yc[0::2], yc[1::2] = cum_c - inc_c, cum_c
    ye[0::2], ye[1::2] = cum_e - inc_e, cum_e
    c = np.interp(edges_s, x, yc)
    e = np.interp(edges_s, x, ye)
    dc = np.diff(c)
    de = np.diff(e)
    width = np.diff(edges_s)
    coverage = dc / width
    with np.errstate(invalid="ignore", divide="ignore"):
        means = np.where(coverage >= min_coverage, de / dc, np.nan)
    return means, coverage


def instants(t_s, values, at_s, max_gap_s):
    """
    Linear interpolation of instantaneous readings, never across a long hole.

    Parameters
    ----------
    t_s : numpy.ndarray
        Reading times [s], increasing.
    values : numpy.ndarray
        Readings (NaN = missing).
    at_s : numpy.ndarray
        Times wanted [s].
    max_gap_s : float
        Two readings further apart than this are not joined [s].

    Returns
    -------
    numpy.ndarray
        Values at ``at_s``; NaN outside the readings or inside a long hole.
    """
    return _instants(t_s, values, at_s, (max_gap_s,))[0]


def _instants(t_s, values, at_s, max_gaps_s):
    """:func:`instants` for several longest holes at once (one search of the readings)."""
    ok = ~np.isnan(values)
    ts, vs = t_s[ok], values[ok]
    if ts.size == 0:
        return [np.full(at_s.shape, np.nan) for _ in max_gaps_s]
    right = np.searchsorted(ts, at_s, side="left")
    exact = (right < ts.size) & (ts[np.minimum(right, ts.size - 1)] == at_s)
    left = right - 1
    inside = (left >= 0) & (right < ts.size)
    li, ri = np.clip(left, 0, ts.size - 1), np.clip(right, 0, ts.size - 1)
    span = ts[ri] - ts[li]
    interp = np.interp(at_s, ts, vs)
    at_reading = vs[np.minimum(right, ts.size - 1)][exact]
    outs = []
    for max_gap_s in max_gaps_s:
        out = np.full(at_s.shape, np.nan)
        join = inside & (span <= max_gap_s)
        out[join] = interp[join]
        out[exact] = at_reading
        outs.append(out)
    return outs


def _check_frame(frame, path):
    if not isinstance(frame, pd.DataFrame) or not isinstance(frame.index, pd.DatetimeIndex):
        raise InputError("expected a DataFrame on a DatetimeIndex", path=path)
    if frame.index.tz is None:
        raise InputError("the time index has no time zone (expected tz-aware times)", path=path)
    if len(frame) < 3:
        raise InputError(f"only {len(frame)} rows (expected at least 3)", path=path)


def _sorted_unique(frame, path, notes):
    if np.all(np.diff(frame.index.asi8) > 0):
        return frame  # increasing, hence unique: the usual case, told without hashing the times
    if not frame.index.is_monotonic_increasing:
        frame = frame.sort_index(kind="stable")
        notes.append("rows sorted into time order")
    dup = frame.index.duplicated(keep=False)
    if dup.any():
        exact = frame.reset_index().duplicated(keep="first").to_numpy()
        frame = frame.loc[~exact]
        if exact.any():
            notes.append(f"{int(exact.sum())} exact duplicate rows dropped")
        if frame.index.duplicated().any():
            t = frame.index[frame.index.duplicated()][0]
            raise InputError(f"time {t.isoformat()} appears twice with different values "
                             "(expected one row per time)", path=path)
    return frame


def _remove_spikes(t_s, v, threshold):
    if v.size < 3:
        return v, 0
    prev, nxt = v[:-2], v[2:]
    mid = v[1:-1]
    d1, d2 = mid - prev, mid - nxt
    with np.errstate(invalid="ignore"):
        spike = (np.abs(d1) > threshold) & (np.abs(d2) > threshold) & (np.sign(d1) == np.sign(d2)) \
            & (np.abs(prev - nxt) < threshold / 2)
    n = int(spike.sum())
    if n:
        v = v.copy()
        v[1:-1][spike] = np.nan
    return v, n


def _stuck_runs(t_s, v, heat, min_s):
    ok = ~np.isnan(v)
    if ok.sum() < 2:
        return []
    idx = np.flatnonzero(ok)
    vv = v[idx]
    steps = np.abs(np.diff(vv))
    steps = steps[steps > 1e-9]
    if steps.size:
        # The reading's resolution: the size of its smallest common steps.
        min_s = min_s * max(1.0, float(np.percentile(steps, 5)) / STUCK_RESOLUTION_K)
    change = np.concatenate([[True], vv[1:] != vv[:-1]])
    starts = np.flatnonzero(change)
    ends = np.concatenate([starts[1:] - 1, [vv.size - 1]])
    dur = t_s[idx[ends]] - t_s[idx[starts]]
    runs = []
    for s, e, d in zip(starts[dur >= min_s], ends[dur >= min_s], dur[dur >= min_s]):
        a, b = idx[s], idx[e]
        if heat is not None:
            h = heat[a:b + 1]
            h = h[~np.isnan(h)]
            if h.size == 0 or np.ptp(h) <= 0:
                continue  # nothing changed; a steady room can read the same value for hours
        runs.append((a, b, float(d)))
    return runs


def align(frame, step_s, path=None, *, max_gap_s=None, min_coverage=0.5, remove_spikes=True,
          stuck_s=STUCK_S):
    """
    Put a log on a uniform grid, find gaps and segments, and flag spikes and stuck sensors.

    Parameters
    ----------
    frame : pandas.DataFrame
        Output of :func:`thermorc.read.read_log` (tz-aware index, interval-start labels).
    step_s : float
        Grid step [s], e.g. 300, 900 or 3600.
    path : str, optional
        The file the data came from, for messages.
    max_gap_s : float, optional
        Longest hole between readings that is bridged [s]. Default: the larger of three times
        the median input spacing and one grid step. A power reading holds until the next one
        when they are at most this far apart, otherwise for one median spacing.
    min_coverage : float
        Fraction of a grid interval that must be observed to give a power mean [-].
    remove_spikes : bool
        Replace temperature spikes (:data:`SPIKE_THRESHOLDS_K`) by NaN before interpolation.
    stuck_s : float
        A temperature that stays exactly constant this long while the heating changes is
        flagged as a stuck sensor [s].

    Returns
    -------
    AlignedData

    Raises
    ------
    thermorc.errors.InputError
        Naive index, too few rows, a non-positive step, conflicting duplicates.
    """
    _check_frame(frame, path)
    if not np.isfinite(step_s) or step_s <= 0:
        raise InputError(f"step {step_s!r} s is not positive (expected a grid step in seconds)", path=path)
    notes, flags = [], []
    frame = _sorted_unique(frame, path, notes)
    frame.index = frame.index.as_unit("ns")
    t_s, t0_ns = _seconds(frame.index)
    spacing = np.diff(t_s)
    input_step_s = float(np.median(spacing))
    if max_gap_s is None:
        max_gap_s = max(3.0 * input_step_s, float(step_s))
    # Grid aligned to the local wall clock of the first stamp (whole hours stay whole hours).
    first = frame.index[0]
    off_s = first.utcoffset().total_seconds()
    g0 = np.floor(((t0_ns / 1e9) + off_s) / step_s) * step_s - off_s - t0_ns / 1e9
    n = int(np.floor((t_s[-1] - g0) / step_s)) + 1
    grid_s = g0 + step_s * np.arange(n)
    edges = np.concatenate([grid_s, [grid_s[-1] + step_s]])
    index = _grid_index(t0_ns + np.round(grid_s * 1e9).astype(np.int64), step_s, frame.index.tz,
                        frame.index.name or "time")

    nxt = np.concatenate([spacing, [input_step_s]])
    dur = np.where(nxt <= max_gap_s, nxt, input_step_s)
    dur = np.minimum(dur, nxt)
    # Durations a reading really covers (a missing reading or two leaves a hole here).
    dur_seen = np.minimum(nxt, 1.5 * input_step_s)
    columns = list(frame.columns)
    raw = {col: frame[col].to_numpy(dtype=float) for col in columns}
    heat = raw.get("heating_w")
    out, filled, spikes, stuck = {}, {}, {}, []
    for col in columns:
        v = raw[col]
        if col in INTERVAL_MEAN_COLUMNS:
            out[col], _ = interval_means(t_s, v, dur, edges, min_coverage)
            _, seen = interval_means(t_s, v, dur_seen, edges, min_coverage)
            filled[col] = ~np.isnan(out[col]) & (seen < 1.0 - 1e-9)
            continue
        if remove_spikes and col in SPIKE_THRESHOLDS_K:
            v, k = _remove_spikes(t_s, v, SPIKE_THRESHOLDS_K[col])
            if k:
                spikes[col] = k
                flags.append(f"{k} spike(s) in {col} (jumps over {SPIKE_THRESHOLDS_K[col]:g} K "
                             "and straight back) removed")
        if col in ("indoor_c", "outdoor_c"):
            for a, b, d in _stuck_runs(t_s, v, heat, stuck_s):
                stuck.append({"column": col, "start": frame.index[a], "end": frame.index[b], "hours": d / 3600})
                flags.append(f"{col} stuck at {v[a]:g} from {frame.index[a].isoformat()} for "
                             f"{d / 3600:.1f} h while the heating changed")
        out[col], seen = _instants(t_s, v, grid_s, (max_gap_s, 1.5 * input_step_s))
        filled[col] = ~np.isnan(out[col]) & np.isnan(seen)
    # Tables from (columns, rows) stacks: one block each, laid out as pandas lays out a dict of
    # columns, without converting the column labels again.
    labels = frame.columns.rename(None)
    values = np.vstack([out[col] for col in columns]) if columns else np.empty((0, len(index)))
    have = ~np.isnan(values)
    seen = have & ~np.vstack([filled[col] for col in columns]) if columns else have
    data = pd.DataFrame(values.T, index=index, columns=labels, copy=False)
    observed = pd.DataFrame(seen.T, index=index, columns=labels, copy=False)
    gap = ~seen.all(axis=0)
    gap_mask = pd.Series(gap, index=index, name="gap")
    segments = _segments(index, gap)
    n_filled = int((have.all(axis=0) & gap).sum())
    if n_filled:
        notes.append(f"{n_filled} grid rows bridged over short holes (values kept, marked in gap_mask)")
    if gap_mask.any():
        notes.append(f"{int(gap_mask.sum())} of {len(gap_mask)} grid rows not observed; "
                     f"{len(segments)} segment(s); holes over {max_gap_s:g} s are never bridged")
    if flags:
        warnings.warn("; ".join(flags), DataQualityWarning, stacklevel=2)
    return AlignedData(data=data, gap_mask=gap_mask, segments=segments, step_s=float(step_s),
                       max_gap_s=float(max_gap_s), observed=observed, input_step_s=input_step_s,
                       spikes=spikes, stuck=stuck, notes=notes, flags=flags)


def _grid_index(ns, step_s, tz, name):
    """The grid's DatetimeIndex (``freq`` set) from its instants [ns since the epoch, UTC]."""
    first = pd.Timestamp(int(ns[0]), unit="ns", tz="UTC").tz_convert(tz)
    index = pd.date_range(first, periods=ns.size, freq=pd.Timedelta(seconds=step_s), name=name, unit="ns")
    if np.array_equal(index.asi8, ns):
        return index  # a regular range: its freq needs no check against the values
    # A step that is not a whole number of nanoseconds: the rounded instants, checked.
    index = pd.DatetimeIndex(pd.to_datetime(ns, utc=True)).tz_convert(tz)
    return pd.DatetimeIndex(index, freq=pd.Timedelta(seconds=step_s), name=name)


def _segments(index, gap):
    ok = ~gap
    if not ok.any():
        return []
    change = np.diff(np.concatenate([[0], ok.astype(np.int8), [0]]))
    starts = np.flatnonzero(change == 1)
    ends = np.flatnonzero(change == -1) - 1
    return [(index[s], index[e]) for s, e in zip(starts, ends)]


def align_weather(weather, index, path=None):
    """
    Resample weather onto a model index and its time zone.

    Parameters
    ----------
    weather : pandas.DataFrame
        Output of :func:`thermorc.read.read_weather`: instants (outdoor_c, wind_m_s) and hourly
        interval means (ghi_w_m2, dni_w_m2, dhi_w_m2), interval-start labels.
    index : pandas.DatetimeIndex
        Target grid (tz-aware, uniform; interval-start labels).
    path : str, optional
        For messages.

    Returns
    -------
    pandas.DataFrame
        Same columns, on ``index``: irradiance as exact means over each target interval,
        temperatures and wind interpolated at each stamp; NaN where the weather has a hole.

    Raises
    ------
    thermorc.errors.InputError
        When the weather does not cover the target times.
    """
    if index.tz is None or weather.index.tz is None:
        raise InputError("weather and model times need time zones", path=path)
    if len(index) < 2:
        raise InputError("target index needs at least two times", path=path)
    w = weather.sort_index()
    w_ns = w.index.as_unit("ns").asi8
    i_ns = pd.DatetimeIndex(index).as_unit("ns").asi8
    w_step = float(np.median(np.diff(w_ns)) / 1e9)
    step = float(np.median(np.diff(i_ns)) / 1e9)
    lo, hi = w_ns[0], w_ns[-1] + int(w_step * 1e9)
    if i_ns[0] < lo - int(w_step * 1e9) or i_ns[-1] + int(step * 1e9) > hi + int(w_step * 1e9):
        raise InputError(
            f"weather covers {w.index[0].isoformat()} to {w.index[-1].isoformat()}, the model times "
            f"{index[0].isoformat()} to {index[-1].isoformat()} (expected the weather to span the model "
            "times; for a typical-year file read it with coerce_year set to the log's year)",
            path=path,
        )
    origin = min(w_ns[0], i_ns[0])
    wt = (w_ns - origin) / 1e9
    it = (i_ns - origin) / 1e9
    edges = np.concatenate([it, [it[-1] + step]])
    dur = np.concatenate([np.minimum(np.diff(wt), w_step), [w_step]])
    out = {}
    for col in w.columns:
        v = w[col].to_numpy(dtype=float)
        # Every irradiance column (``*_w_m2``) is an interval mean, whatever its plane.
        if col.endswith("_w_m2") or col in INTERVAL_MEAN_COLUMNS:
            out[col], _ = interval_means(wt, v, dur, edges, 0.5)
        else:
            vals = instants(wt, v, it, 3.0 * w_step)
            # Hold the nearest reading for up to one weather step past either end (a typical
            # year ends at 23:00 on 31 December; the model's last interval may start later).
            near = np.isnan(vals) & (it >= wt[0] - w_step) & (it <= wt[-1] + w_step)
            if near.any():
                pos = np.clip(np.searchsorted(wt, it[near]), 0, wt.size - 1)
                vals[near] = v[pos]
            out[col] = vals
    return pd.DataFrame(out, index=index)
