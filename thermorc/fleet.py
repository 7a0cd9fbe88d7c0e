"""
Fleets: calibrate many homes listed in a manifest, one row of results per home.

The flow is manifest -> homes -> batches -> workers -> row groups -> RESULTS.parquet ->
summary. :func:`read_manifest` checks every row of a CSV or TOML manifest before any work
starts; :func:`calibrate_home` runs the ordinary single-home chain
(:func:`thermorc.chain.calibrate_files`) for one home and turns whatever happens, good or
bad, into one flat row; :func:`run_fleet` sends homes to a local process pool
(:class:`concurrent.futures.ProcessPoolExecutor`) or to an existing Dask distributed
cluster through a bounded queue, topped up as rows return, and streams the rows to Parquet
a batch at a time; :func:`summarise` describes the
distribution of the results.

Resume decides by content: each row carries an input fingerprint
(:func:`input_fingerprint`, a SHA-256 over the bytes of the files the home reads and its
manifest fields and options); a row whose fingerprint differs from the home's fingerprint now
is stale and its home is calculated again. One run at a time writes an output: the run holds
an :class:`OutputLock` on it from start to end.

Durability: every finished batch is written, atomically, as one small Parquet file in a
journal folder beside the output (``RESULTS.parquet.partial/``) and as one row group of a
temporary output file. The temporary file replaces ``RESULTS.parquet`` only when the run
ends, so an interrupted run leaves the previous output untouched and the journal holding
every finished batch; the next run with the same output picks up the old output and the
journal, skips the homes in them that are current and calculates the rest. The module adds
no physics.
"""

from __future__ import annotations

import contextlib
import csv
import io
import itertools
import math
import os
import shutil
import tempfile
import time
import tomllib
import warnings
from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

from thermorc.errors import InputError, ThermorcWarning
from thermorc.network import PRESETS

__all__ = [
    "HomeSpec",
    "MANIFEST_COLUMNS",
    "RESULT_COLUMNS",
    "read_manifest",
    "calibrate_home",
    "run_fleet",
    "FleetRun",
    "summarise",
    "summary_path",
    "journal_path",
    "lock_path",
    "input_fingerprint",
    "OutputLock",
]

#: Manifest columns (CSV header names, TOML keys). ``id`` and ``log`` are required.
MANIFEST_COLUMNS = (
    "id", "log", "partition", "column_map", "site", "weather", "tz", "interval", "floor_area_m2",
    "construction", "ground_c", "ground_share", "window_areas", "gains_hours",
)
_PATH_COLUMNS = ("log", "column_map", "weather", "construction")
_MODELS = (*PRESETS, "auto")

# Plausible floor areas of one dwelling (common practice: a studio flat has some 20 m2, a
# large detached house some 1000 m2; the wide span only catches unit and typing errors).
FLOOR_AREA_BOUNDS_M2 = (5.0, 20000.0)

# One row per home; the order and types are the file contract for scripts downstream.
RESULT_COLUMNS = (
    ("home_id", "string"),
    ("status", "string"),
    ("error", "string"),
    ("model", "string"),
    ("model_requested", "string"),
    ("ua_w_per_k", "float64"),
    ("ua_low_w_per_k", "float64"),
    ("ua_high_w_per_k", "float64"),
    ("floor_area_m2", "float64"),
    ("ua_per_floor_area_w_per_m2k", "float64"),
    ("tau1_h", "float64"),
    ("tau2_h", "float64"),
    ("capacitance_j_per_k", "float64"),
    ("solar_aperture_m2", "float64"),
    ("cv_rmse_pct", "float64"),
    ("nmbe_pct", "float64"),
    ("rmse_k", "float64"),
    ("heating_share", "float64"),
    ("test_days", "float64"),
    ("test_rmse_k", "float64"),
    ("test_bias_k", "float64"),
    ("test_cv_rmse_pct", "float64"),
    ("test_nmbe_pct", "float64"),
    ("test_heating_share", "float64"),
    ("test_warnings", "string"),
    ("n_samples", "int64"),
    ("data_verdict", "string"),
    ("n_warnings", "int64"),
    ("warnings", "string"),
    ("data_warnings", "string"),
    ("seconds", "float64"),
    ("thermorc_version", "string"),
    ("log_sha256", "string"),
    ("column_map_sha256", "string"),
    ("weather_sha256", "string"),
    ("construction_sha256", "string"),
    ("inputs_sha256", "string"),
)

#: Joins several warnings in one text cell.
WARNING_SEPARATOR = " | "


def _schema():
    import pyarrow as pa

    types = {"string": pa.string(), "float64": pa.float64(), "int64": pa.int64()}
    return pa.schema([(name, types[kind]) for name, kind in RESULT_COLUMNS])


def journal_path(out):
    """The folder that holds finished batches of an unfinished run writing ``out``."""
    return os.fspath(out) + ".partial"


def summary_path(out):
    """The summary CSV written beside ``out`` (``RESULTS.parquet`` -> ``RESULTS.summary.csv``)."""
    root, _ = os.path.splitext(os.fspath(out))
    return root + ".summary.csv"


# ---------------------------------------------------------------------------------------------
# Manifest
# ---------------------------------------------------------------------------------------------

@dataclass
class HomeSpec:
    """
    One home of a fleet, as the manifest gives it, with paths made absolute.

    Attributes
    ----------
    home_id : str
        The manifest's ``id``.
    log : str
        Log file, or a Parquet dataset (a file or a folder) when ``partition`` is given.
    partition : dict
        Column -> value that selects this home's rows of a Parquet dataset (hive folders
        ``column=value`` or a column inside the files); empty for a log file of its own.
    column_map, weather, construction : str or None
        Column-map TOML, weather file, construction TOML.
    site : str or None
        ``"LAT,LON"`` [deg].
    tz : str or None
        IANA time zone of naive log times.
    interval : str or None
        ``start`` or ``end``: interval label of the log's powers.
    floor_area_m2 : float or None
        Conditioned floor area. [m²]
    ground_c, ground_share : float or None
        Ground temperature [°C] and the share of the heat loss that goes to it (see
        :func:`thermorc.chain.calibrate_files`); the share may come from the construction.
    window_areas : str or None
        Window area per façade, ``"S=8,E=3,W=3,N=4"`` [m²] (``;`` may join the pairs too):
        weights the façades of the solar input (:func:`thermorc.chain.parse_window_areas`).
    gains_hours : tuple of float or None
        This household's start hours of the gains periods [h, local time], in place of the
        run's (:func:`thermorc.result.gains_schedule`).
    manifest : str
        The manifest file, for messages.
    row : int or None
        Row (CSV line, or the line of the TOML ``[[home]]`` header) of this home.
    """

    home_id: str
    log: str
    partition: dict = field(default_factory=dict)
    column_map: str | None = None
    site: str | None = None
    weather: str | None = None
    tz: str | None = None
    interval: str | None = None
    floor_area_m2: float | None = None
    construction: str | None = None
    ground_c: float | None = None
    ground_share: float | None = None
    window_areas: str | None = None
    gains_hours: tuple | None = None
    manifest: str | None = None
    row: int | None = None


def read_manifest(path):
    """
    Read and check a fleet manifest (CSV or TOML).

    Parameters
    ----------
    path : str or os.PathLike
        ``.toml`` for TOML, anything else is read as CSV with a header row. The columns
        (TOML keys) are :data:`MANIFEST_COLUMNS`; ``id`` and ``log`` are required; relative
        paths are relative to the manifest's folder. A TOML manifest lists homes as
        ``[[home]]`` tables and may give shared values in a ``[defaults]`` table.
        docs/fleet.md describes the format.

    Returns
    -------
    list of HomeSpec
        In manifest order.

    Raises
    ------
    InputError
        The first bad row, with the manifest file, row and column.
    """
    from thermorc.read import check_file, read_text

    path = check_file(path)
    text = read_text(path, "utf-8-sig")
    if os.path.splitext(path)[1].lower() == ".toml":
        records = _toml_records(text, path)
    else:
        records = _csv_records(text, path)
    if not records:
        raise InputError("lists no homes (expected at least one row after the header)", path=path)
    base = os.path.dirname(os.path.abspath(path))
    homes = []
    seen = {}
    for values, row, key_rows in records:
        home = _home_from_record(values, row, key_rows, path, base)
        if home.home_id in seen:
            raise InputError(
                f"id {home.home_id!r} is listed twice (also on row {seen[home.home_id]}; expected one row per home)",
                path=path, row=key_rows.get("id", row), column="id",
            )
        seen[home.home_id] = row
        homes.append(home)
    return homes


def _csv_records(text, path):
    reader = csv.reader(io.StringIO(text))
    try:
        header = next(reader)
    except StopIteration:
        raise InputError("is empty (expected a header row: id,log,...)", path=path) from None
    header = [h.strip() for h in header]
    for name in header:
        if name not in MANIFEST_COLUMNS:
            raise InputError(
                f"unknown column {name!r} (expected some of {', '.join(MANIFEST_COLUMNS)})", path=path, row=1, column=name
            )
    if len(set(header)) != len(header):
        twice = next(h for h in header if header.count(h) > 1)
        raise InputError("column appears twice in the header", path=path, row=1, column=twice)
    records = []
    try:
        for cells in reader:
            row = reader.line_num
            if not any(c.strip() for c in cells):
                continue
            if len(cells) > len(header):
                raise InputError(
                    f"has {len(cells)} cells but the header names {len(header)} columns (a cell with a comma, such "
                    "as a site LAT,LON, must be in double quotes)", path=path, row=row
                )
            values = {h: c.strip() for h, c in zip(header, cells) if c.strip() != ""}
            records.append((values, row, {}))
    except csv.Error as exc:
        raise InputError(f"is not valid CSV ({exc})", path=path, row=reader.line_num) from None
    return records


def _toml_records(text, path):
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"is not valid TOML ({exc})", path=path) from None
    lines = text.splitlines()
    for key in doc:
        if key not in ("home", "defaults"):
            raise InputError(f"unknown table {key!r} (expected [defaults] and [[home]] tables)", path=path, column=key)
    defaults = doc.get("defaults", {})
    if not isinstance(defaults, dict):
        raise InputError("'defaults' must be a table", path=path, column="defaults")
    homes = doc.get("home", [])
    if not isinstance(homes, list) or not all(isinstance(h, dict) for h in homes):
        raise InputError("'home' must be an array of tables ([[home]])", path=path, column="home")
    # tomllib keeps no line numbers; the n-th [[home]] header is the n-th table.
    header_rows = [i + 1 for i, line in enumerate(lines) if line.strip().startswith("[[home]]")]
    defaults_row = next((i + 1 for i, line in enumerate(lines) if line.strip().startswith("[defaults]")), None)
    default_rows = _key_rows(lines, defaults_row, defaults)
    records = []
    for n, table in enumerate(homes):
        row = header_rows[n] if n < len(header_rows) else None
        key_rows = dict(default_rows)
        key_rows.update(_key_rows(lines, row, table))
        values = dict(defaults)
        values.update(table)
        for key in values:
            if key not in MANIFEST_COLUMNS and key != "filters":
                raise InputError(
                    f"unknown key {key!r} (expected some of {', '.join(MANIFEST_COLUMNS)}, filters)",
                    path=path, row=key_rows.get(key, row), column=key,
                )
        records.append((values, row, key_rows))
    return records


def _key_rows(lines, start, table):
    """Line numbers of the keys of a TOML table that starts on line ``start``."""
    if start is None:
        return {}
    found = {}
    for i in range(start, len(lines)):
        stripped = lines[i].strip()
        if stripped.startswith("["):
            break
        key = stripped.split("=", 1)[0].strip().strip('"')
        if "=" in stripped and key in table and key not in found:
            found[key] = i + 1
    return found


def _text(values, key, where):
    value = values.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise InputError(f"is {value!r} (expected text)", **where(key))
    value = str(value).strip()
    return value or None


def _home_from_record(values, row, key_rows, path, base):
    from thermorc.chain import parse_site, parse_window_areas
    from thermorc.read import zone

    def where(key):
        return {"path": path, "row": key_rows.get(key, row), "column": key}

    home_id = _text(values, "id", where)
    if home_id is None:
        raise InputError("no home id (expected a unique name for each home)", **where("id"))
    log = _text(values, "log", where)
    if log is None:
        raise InputError("no log given (expected a log file or a Parquet dataset)", **where("log"))
    paths = {}
    for key in _PATH_COLUMNS:
        value = _text(values, key, where)
        paths[key] = None if value is None else os.path.normpath(os.path.join(base, os.path.expanduser(value)))
    partition = _partition(values, where)
    site = _text(values, "site", where)
    if site is not None:
        try:
            parse_site(site)
        except InputError as exc:
            raise InputError(f"site is {site!r} (expected LAT,LON in decimal degrees, e.g. 45.0,-90.0)", **where("site")) from exc
    tz = _text(values, "tz", where)
    if tz is not None:
        try:
            zone(tz)
        except InputError as exc:
            raise InputError(exc.message, **where("tz")) from None
    interval = _text(values, "interval", where)
    if interval is not None and interval not in ("start", "end"):
        raise InputError(f"interval is {interval!r} (expected start or end)", **where("interval"))
    area = values.get("floor_area_m2")
    if area is not None:
        try:
            area = float(area) if not isinstance(area, bool) else math.nan
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"floor area is {area!r} (expected a number of square metres)", **where("floor_area_m2")) from None
        lo, hi = FLOOR_AREA_BOUNDS_M2
        if not (math.isfinite(area) and lo <= area <= hi):
            raise InputError(
                f"floor area {values.get('floor_area_m2')!r} m2 is outside {lo:g}..{hi:g} m2 (expected the "
                "conditioned floor area of one dwelling in square metres)", **where("floor_area_m2"),
            )
    ground = {}
    for key in ("ground_c", "ground_share"):
        value = values.get(key)
        if value is None or (isinstance(value, str) and not value.strip()):
            continue
        try:
            ground[key] = float(value) if not isinstance(value, bool) else math.nan
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"{key} is {value!r} (expected a number)", **where(key)) from None
    from thermorc.estimate import check_ground_keys

    check_ground_keys(ground, paths["construction"] is not None, where)
    window_areas = _text(values, "window_areas", where)
    if window_areas is not None:
        try:
            parse_window_areas(window_areas, name="window_areas")
        except InputError as exc:
            raise InputError(exc.message, **where("window_areas")) from None
    return HomeSpec(
        home_id=home_id, log=paths["log"], partition=partition, column_map=paths["column_map"], site=site,
        weather=paths["weather"], tz=tz, interval=interval, floor_area_m2=area,
        construction=paths["construction"], ground_c=ground.get("ground_c"), ground_share=ground.get("ground_share"),
        window_areas=window_areas, gains_hours=_gains_hours(values.get("gains_hours"), where), manifest=path, row=row,
    )


def _gains_name(gains):
    """The ``--gains`` spelling of a gains model or schedule."""
    kind = gains.get("kind", "constant") if isinstance(gains, dict) else str(gains)
    return kind.replace("_", "-")


def _gains_hours(value, where):
    """A household's gains hours: a TOML list or a text ``9,12,20,2`` (``;`` too), checked as far
    as a home alone allows (the count must match the run's ``--gains``, checked per home)."""
    from thermorc.result import gains_schedule, parse_gains_hours

    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    try:
        hours = parse_gains_hours(value, "gains_hours")
        kind = {2: "day_night", 4: "four_period"}.get(len(hours))
        if kind is None:
            raise InputError(f"gains_hours has {len(hours)} hours (expected 2 for day-night or 4 for four-period gains)")
        gains_schedule(kind, hours, where="gains_hours")
    except InputError as exc:
        raise InputError(exc.message, **where("gains_hours")) from None
    return tuple(hours)


def _partition(values, where):
    """``home_id=123/year=2024`` (or a TOML ``filters`` table) -> ``{column: text value}``."""
    out = {}
    text = _text(values, "partition", where)
    if text is not None:
        for part in text.strip("/").split("/"):
            key, sep, value = part.partition("=")
            if not sep or not key.strip() or not value.strip():
                raise InputError(
                    f"partition is {text!r} (expected COLUMN=VALUE, several joined by '/', e.g. home_id=123)",
                    **where("partition"),
                )
            out[key.strip()] = value.strip()
    filters = values.get("filters")
    if filters is not None:
        if not isinstance(filters, dict) or not filters:
            raise InputError("filters must be a table of column = value (e.g. {home_id = 123})", **where("filters"))
        for key, value in filters.items():
            if isinstance(value, (dict, list)) or isinstance(value, bool):
                raise InputError(f"filter {key} = {value!r} (expected a text or number to match)", **where("filters"))
            out[str(key)] = str(value)
    return out


# ---------------------------------------------------------------------------------------------
# One home
# ---------------------------------------------------------------------------------------------

def _one_line(text, limit=500):
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _partition_frame(dataset, partition):
    """
    The rows of one home from a Parquet dataset, with the selecting columns dropped.

    Returns the rows as a DataFrame (as a Parquet reader gives them, without an index) and
    their SHA-256 (:func:`thermorc.chain.table_digest` of the rows as read).
    """
    import pyarrow as pa
    import pyarrow.dataset as ds

    from thermorc.chain import table_digest

    folder = dataset
    if os.path.isdir(dataset):
        # A hive layout is read straight from the home's folder, without listing the others.
        hive = os.path.join(dataset, *[f"{k}={v}" for k, v in partition.items()])
        if os.path.isdir(hive):
            only = _only_file(hive)
            if only is not None:
                # One file, as writers usually leave a home: read it without dataset discovery.
                import pyarrow.parquet as pq

                return _rows(pq.ParquetFile(only).read(use_threads=False), table_digest)
            return _rows(ds.dataset(hive, format="parquet").to_table(use_threads=False), table_digest)
        data = ds.dataset(folder, format="parquet", partitioning="hive")
    elif os.path.exists(dataset):
        data = ds.dataset(dataset, format="parquet")
    else:
        raise InputError("no such file or folder", path=dataset)
    expr = None
    for key, value in partition.items():
        if key not in data.schema.names:
            raise InputError(
                f"partition column {key!r} is not in the dataset (found {', '.join(data.schema.names[:12])})",
                path=dataset, column=key,
            )
        kind = data.schema.field(key).type
        try:
            scalar = pa.scalar(value).cast(kind)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            raise InputError(f"partition value {value!r} does not fit the column's type {kind}", path=dataset, column=key) from None
        term = ds.field(key) == scalar
        expr = term if expr is None else expr & term
    table = data.to_table(filter=expr, use_threads=False)
    return _rows(table.drop_columns([k for k in partition if k in table.column_names]), table_digest)


def _only_file(folder):
    """The one data file of a folder that holds no other data file or folder, else None."""
    found = []
    with os.scandir(folder) as entries:
        for entry in entries:
            if entry.name.startswith(_DATASET_IGNORE_PREFIXES):
                continue  # skipped by dataset discovery too
            if not entry.is_file():
                return None
            found.append(entry.path)
    return found[0] if len(found) == 1 else None


def _rows(table, digest):
    # One worker calibrates one home at a time, so Arrow's own threads would only compete
    # with the other workers for the same cores.
    frame = table.to_pandas(use_threads=False)
    if not frame.index.equals(pd.RangeIndex(len(frame))):
        # The reader sees the columns only, never an index stored with the pandas metadata.
        frame = frame.reset_index(drop=True)
    return frame, digest(table)


def _log_input(home):
    """
    What :func:`thermorc.chain.calibrate_files` reads for this home.

    Returns ``(log, table, sha256)``: a log file, or for a partition of a dataset the name
    shown in messages (``DATASET[home_id=123]``), its rows already read and their SHA-256.
    """
    if not home.partition:
        if os.path.isdir(home.log):
            raise InputError("is a folder (expected a log file, or a partition such as home_id=123 to pick this "
                             "home's rows of a Parquet dataset)", path=home.log)
        return home.log, None, None
    frame, digest = _partition_frame(home.log, home.partition)
    label = f"{home.log}[{'/'.join(f'{k}={v}' for k, v in home.partition.items())}]"
    if len(frame) == 0:
        raise InputError("no rows in this partition", path=label)
    return label, frame, digest


def _blank_row(home, model):
    from thermorc import __version__

    row = {name: None for name, _ in RESULT_COLUMNS}
    row.update(home_id=home.home_id, model_requested=model, floor_area_m2=home.floor_area_m2, n_warnings=0,
               thermorc_version=__version__)
    return row


def _finite(value):
    try:
        value = float(value)
    except (TypeError, ValueError):
        return None
    return value if math.isfinite(value) else None


def flatten_result(result, home, model="auto"):
    """
    One fleet row from a calibration result.

    Parameters
    ----------
    result : thermorc.result.CalibrationResult or dict
        The result, or its :meth:`~thermorc.result.CalibrationResult.to_dict`.
    home : HomeSpec
        The home (for its id and floor area).
    model : str
        The model that was asked for.

    Returns
    -------
    dict
        Keys of :data:`RESULT_COLUMNS`; ``status`` is ``"ok"``.
    """
    body = result if isinstance(result, dict) else result.to_dict()
    row = _blank_row(home, model)
    ua = _finite(body.get("heat_loss_coefficient_w_per_k"))
    taus = [_finite(t) for t in body.get("time_constants_h") or []]
    fit = body.get("fit") or {}
    interval = (body.get("intervals") or {}).get("heat_loss_coefficient_w_per_k") or [None, None]
    warns = [_one_line(w) for w in body.get("warnings") or []]
    provenance = (body.get("provenance") or {}).get("inputs", {})
    test = body.get("validation") or {}
    row.update(
        status="ok",
        model=body.get("model"),
        ua_w_per_k=ua,
        ua_low_w_per_k=_finite(interval[0]),
        ua_high_w_per_k=_finite(interval[1]),
        ua_per_floor_area_w_per_m2k=(ua / home.floor_area_m2) if ua is not None and home.floor_area_m2 else None,
        tau1_h=taus[0] if len(taus) > 0 else None,
        tau2_h=taus[1] if len(taus) > 1 else None,
        capacitance_j_per_k=_finite(body.get("capacitance_j_per_k")),
        solar_aperture_m2=_finite((body.get("parameters") or {}).get("solar_aperture_m2")),
        cv_rmse_pct=_finite(fit.get("cv_rmse_pct")),
        nmbe_pct=_finite(fit.get("nmbe_pct")),
        rmse_k=_finite(fit.get("rmse_k")),
        heating_share=_finite(body.get("heating_share")),
        test_days=_finite(test.get("days")),
        test_rmse_k=_finite(test.get("rmse_k")),
        test_bias_k=_finite(test.get("bias_k")),
        test_cv_rmse_pct=_finite(test.get("cv_rmse_pct")),
        test_nmbe_pct=_finite(test.get("nmbe_pct")),
        test_heating_share=_finite(test.get("heating_share")),
        test_warnings=WARNING_SEPARATOR.join(_one_line(w) for w in test.get("warnings") or []) or None,
        n_samples=int(fit["n_samples"]) if _finite(fit.get("n_samples")) is not None else None,
        data_verdict=(body.get("data_quality") or {}).get("verdict"),
        n_warnings=len(warns),
        warnings=WARNING_SEPARATOR.join(warns) or None,
    )
    for name in ("log", "column_map", "weather", "construction"):
        row[f"{name}_sha256"] = (provenance.get(name) or {}).get("sha256")
    version = (body.get("provenance") or {}).get("thermorc_version")
    if version:
        row["thermorc_version"] = version
    return row


def calibrate_home(home, model="auto", gains="constant", test_days=None):
    """
    Calibrate one home of a fleet; never raises for a bad home.

    Parameters
    ----------
    home : HomeSpec or dict
        The home (a dict is passed to :class:`HomeSpec`).
    model : {'1R1C', '2R2C', '3R2C', '4R3C', 'auto'}
        Model to fit, or ``auto`` to compare the presets of ``estimate.MODEL_ORDER``.
    gains : {'constant', 'day_night', 'four_period'}
        Model of unlogged internal gains.
    test_days : float, optional
        Keep each log's last days back and fill the ``test_*`` columns with how the model
        predicts them (:func:`thermorc.estimate.validate`). [d]

    Returns
    -------
    dict
        One row with the keys of :data:`RESULT_COLUMNS`. A home that cannot be calibrated
        gets ``status = "error"`` and the one-line reason in ``error`` (for bad input, the
        file, row and column as :class:`~thermorc.errors.InputError` states them).
    """
    from thermorc.chain import calibrate_files
    from thermorc.errors import ThermorcWarning

    if isinstance(home, dict):
        home = HomeSpec(**home)
    started = time.perf_counter()
    row = _blank_row(home, model)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            log, table, digest = _log_input(home)
            if home.gains_hours is not None:
                from thermorc.result import gains_schedule

                try:
                    gains = gains_schedule(gains, list(home.gains_hours), where="gains_hours")
                except InputError as exc:
                    raise InputError(f"{exc.message} (the run's --gains is {_gains_name(gains)})", path=home.manifest,
                                     row=home.row, column="gains_hours") from None
            result = calibrate_files(
                log, column_map=home.column_map, tz=home.tz, interval=home.interval, weather=home.weather,
                site=home.site, construction=home.construction, model=model, gains=gains, table=table,
                table_sha256=digest, ground_c=home.ground_c, ground_share=home.ground_share,
                window_areas=home.window_areas, test_days=test_days,
            )
        row = flatten_result(result, home, model)
        data_warns = [_one_line(w.message) for w in caught if issubclass(w.category, ThermorcWarning)]
        # The fit's cautions and the held-out days' have columns of their own.
        data_warns = [w for w in dict.fromkeys(data_warns)
                      if w not in (row["warnings"] or "") and w not in (row["test_warnings"] or "")]
        row["data_warnings"] = WARNING_SEPARATOR.join(data_warns) or None
    except InputError as exc:
        row.update(status="error", error=_one_line(exc))
    except Exception as exc:  # noqa: BLE001 - one bad home must not stop a fleet
        row.update(status="error", error=_one_line(f"internal error: {type(exc).__name__}: {exc}"))
    row["seconds"] = time.perf_counter() - started
    return row


# ---------------------------------------------------------------------------------------------
# Input fingerprints (what decides, on resume, whether a row is still current)
# ---------------------------------------------------------------------------------------------

#: Version of the fingerprint recipe; a change of recipe makes every older row stale.
FINGERPRINT_RECIPE = 1

# pyarrow's dataset discovery skips files and folders whose name starts with these
# (pyarrow.dataset.dataset, ``ignore_prefixes``, default ['.', '_']); the fingerprint of a
# dataset follows it, so that a writer's temporary files do not make its homes stale.
_DATASET_IGNORE_PREFIXES = (".", "_")


class _DigestCache:
    """
    SHA-256 of files, each file read once per run.

    Many homes share a weather file or one Parquet dataset; the cache, keyed by the file's
    identity and its size and modification time at the moment of hashing, keeps that shared
    file from being read once per home. It lives for one run only, so that the content hash,
    not the modification time, is what a resume compares.
    """

    def __init__(self):
        self._known = {}

    def file(self, path):
        """Hex SHA-256 of one file's bytes (read in 1 MiB blocks)."""
        from thermorc.chain import file_digest

        st = os.stat(path)
        key = (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns)
        if key not in self._known:
            self._known[key] = file_digest(path)
        return self._known[key]

    def tree(self, folder):
        """Digest of every data file under ``folder``: sorted relative names and their SHA-256."""
        import hashlib

        digest = hashlib.sha256()
        for root, dirs, files in os.walk(folder, followlinks=True):
            dirs[:] = sorted(d for d in dirs if not d.startswith(_DATASET_IGNORE_PREFIXES))
            for name in sorted(f for f in files if not f.startswith(_DATASET_IGNORE_PREFIXES)):
                path = os.path.join(root, name)
                rel = os.path.relpath(path, folder).replace(os.sep, "/")
                digest.update(f"{rel}\0{self.file(path)}\n".encode())
        return digest.hexdigest()


def _content(path, cache, folder_ok=False):
    """What a home reads from ``path``, as a short text: a digest, or why there is none."""
    if path is None:
        return None
    try:
        if os.path.isdir(path):
            # A folder is read only as a Parquet dataset; anywhere else it is an error row,
            # and hashing, say, a whole system folder would cost much and tell nothing.
            return "tree:" + cache.tree(path) if folder_ok else f"folder:{path}"
        return "file:" + cache.file(path)
    except (OSError, ValueError) as exc:  # missing, unreadable, a NUL byte in the name
        # The path is part of the marker: naming another missing file is a change.
        return f"unreadable:{type(exc).__name__}:{path}"


def input_fingerprint(home, model="auto", gains="constant", test_days=None, cache=None):
    """
    SHA-256 over everything a home's result depends on.

    Parameters
    ----------
    home : HomeSpec
        The home.
    model, gains : str
        The model and gains options of the run.
    test_days : float, optional
        The run's held-out days (``--test-days``).
    cache : _DigestCache, optional
        File digests already computed in this run.

    Returns
    -------
    str
        Hex digest of a canonical JSON record (sorted keys) of: the bytes of the log (for a
        hive-partitioned dataset the files of the home's partition folder; for any other
        dataset, all its files), column map, weather and construction files, each as its
        SHA-256; the manifest fields ``partition``, ``site``, ``tz``, ``interval`` and
        ``floor_area_m2`` (and ``ground_c``, ``ground_share``, ``window_areas`` when given); ``model``, ``gains``,
        ``test_days`` (when given) and the recipe version. File paths count
        only through their content, so moving the data keeps rows current.

    Notes
    -----
    A file's size and modification time do not prove that its content is unchanged (a copy
    that preserves times, or a coarse-clock file system, keeps both); the digest is of the
    bytes. Files are hashed before the home is calibrated, so a change made while it runs
    shows at the next resume. SHA-256 is specified in NIST FIPS 180-4, "Secure Hash
    Standard (SHS)," 2015, doi:10.6028/NIST.FIPS.180-4.
    """
    import hashlib
    import json

    cache = cache if cache is not None else _DigestCache()
    log = home.log
    if home.partition and log is not None and os.path.isdir(log):
        hive = os.path.join(log, *[f"{k}={v}" for k, v in home.partition.items()])
        if os.path.isdir(hive):  # the same choice as _partition_frame
            log = hive
    record = {
        "recipe": FINGERPRINT_RECIPE,
        "log": _content(log, cache, folder_ok=bool(home.partition)),
        "column_map": _content(home.column_map, cache),
        "weather": _content(home.weather, cache),
        "construction": _content(home.construction, cache),
        "partition": sorted(home.partition.items()),
        "site": home.site,
        "tz": home.tz,
        "interval": home.interval,
        "floor_area_m2": home.floor_area_m2,
        "model": model,
        "gains": gains,
    }
    # Only when given, so that the fingerprints of homes without a ground stay as they were.
    record.update({k: getattr(home, k) for k in ("ground_c", "ground_share", "window_areas", "gains_hours")
                   if getattr(home, k) is not None})
    if test_days is not None:
        record["test_days"] = float(test_days)
    text = json.dumps(record, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode()).hexdigest()


# ---------------------------------------------------------------------------------------------
# Output lock (one run at a time writes an output)
# ---------------------------------------------------------------------------------------------

def lock_path(out):
    """
    The lock file beside ``out`` held while a run writes it.

    Parameters
    ----------
    out : str or os.PathLike
        The results file.

    Returns
    -------
    str
        ``out`` with ``.lock`` appended (``RESULTS.parquet`` -> ``RESULTS.parquet.lock``).
    """
    return os.fspath(out) + ".lock"


def _pid_alive(pid):
    """Whether a process with this id runs on this machine (POSIX ``kill(pid, 0)``)."""
    if os.name != "posix":
        return True  # no safe probe here (signal 0 ends a process on Windows): assume it runs
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # it exists, under another user
    except (OverflowError, ValueError):
        return False
    return True


def _flock(fd):
    """Try an exclusive advisory lock on ``fd``: True if taken, False if held elsewhere, None if unsupported."""
    try:
        import fcntl
    except ImportError:
        return None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    except OSError:
        return None  # e.g. a file system without flock
    return True


class OutputLock:
    """
    An exclusive lock on one fleet output, held for a whole run.

    The lock file beside the output (:func:`lock_path`) holds the holder's pid, host name and
    start time as JSON. It appears in one step, already filled in and locked: it is written
    under a temporary name and hard-linked to the lock name, and a link fails if the name
    exists (POSIX ``link``, IEEE Std 1003.1-2017, error EEXIST). The Linux ``open(2)`` manual
    page, under ``O_EXCL``, gives this recipe for lock files that must also work over NFS.
    The holder also keeps an ``flock`` on it, which the system drops when the process dies.
    A lock that is not flocked, from this host, whose pid no longer runs, is stale: it is
    taken over with a :class:`~thermorc.errors.ThermorcWarning`. Anything else stops the
    run with an :class:`~thermorc.errors.InputError` that names the holder.

    Parameters
    ----------
    out : str
        The output file to lock.
    """

    def __init__(self, out):
        self.out = os.fspath(out)
        self.path = lock_path(self.out)
        self.fd = None

    def _info(self):
        import datetime
        import json
        import socket

        started = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
        return json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "started": started}).encode()

    def _create(self):
        """Put a filled-in, locked lock file in place; False if one exists."""
        folder = os.path.dirname(os.path.abspath(self.path))
        fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix="-" + os.path.basename(self.path), dir=folder)
        placed = False
        try:
            os.fchmod(fd, 0o644)  # others may read who holds it
            os.write(fd, self._info())
            os.fsync(fd)
            _flock(fd)
            try:
                os.link(tmp, self.path)
            except FileExistsError:
                return False
            except OSError:
                # No hard links on this file system: an exclusive create instead. The file is
                # empty for a moment, so a run that looks then may see an unreadable lock.
                os.close(fd)
                fd = -1
                try:
                    fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_RDWR, 0o644)
                except FileExistsError:
                    return False
                os.write(fd, self._info())
                os.fsync(fd)
                _flock(fd)
            self.fd = fd
            placed = True
            return True
        finally:
            if not placed:
                with contextlib.suppress(OSError):
                    os.close(fd)
            with contextlib.suppress(OSError):
                os.remove(tmp)

    def _holder(self, raw):
        import json

        try:
            info = json.loads(raw.decode("utf-8"))
            pid = int(info["pid"])
        except (ValueError, KeyError, TypeError, UnicodeDecodeError):
            return None
        if pid <= 0:  # kill() would address a process group, not a process
            return None
        return {"pid": pid, "host": str(info.get("host", "?")), "started": str(info.get("started", "?"))}

    def _refuse(self, holder, why):
        who = "another run" if holder is None else (
            f"pid {holder['pid']} on host {holder['host']}, started {holder['started']}")
        raise InputError(
            f"is being written by another thermorc fleet run ({who}; {why}); wait for it to finish or write to "
            f"another --out (delete {os.path.basename(self.path)} only if that run is gone)", path=self.out,
        )

    def _take_over_or_refuse(self):
        """Inspect an existing lock file; on a stale one, keep it (locked) as ours."""
        import socket

        try:
            fd = os.open(self.path, os.O_RDWR)
        except FileNotFoundError:
            return False  # released meanwhile: try to create it again
        try:
            got = _flock(fd)
            raw = os.read(fd, 4096)
            holder = self._holder(raw)
            if got is False:
                self._refuse(holder, "its lock is held")
            if got:
                try:
                    moved = os.fstat(fd).st_ino != os.stat(self.path).st_ino
                except FileNotFoundError:
                    moved = True
                if moved:
                    os.close(fd)  # the holder removed it as we opened it: start again
                    return False
            if holder is None:
                if got is None:
                    self._refuse(None, "the lock file cannot be read")
            elif holder["host"] != socket.gethostname():
                self._refuse(holder, "a process on another host cannot be checked from here")
            elif _pid_alive(holder["pid"]):
                self._refuse(holder, "that process is running")
            os.lseek(fd, 0, os.SEEK_SET)
            os.ftruncate(fd, 0)
            os.write(fd, self._info())
            os.fsync(fd)
        except BaseException:
            with contextlib.suppress(OSError):
                os.close(fd)
            raise
        self.fd = fd
        left = "an unreadable lock" if holder is None else f"a lock left by pid {holder['pid']}, which is not running"
        warnings.warn(
            f"{os.path.basename(self.out)}: took over {left} ({os.path.basename(self.path)}); the journal of that run, "
            "if any, is resumed", ThermorcWarning, stacklevel=3,
        )
        return True

    def acquire(self):
        """
        Take the lock.

        Returns
        -------
        OutputLock
            ``self``, holding the lock until :meth:`release`.

        Raises
        ------
        InputError
            Another run holds it; the message names its pid, host and start time.
        """
        for _ in range(5):  # more than one round only while other runs come and go
            if self._create() or self._take_over_or_refuse():
                return self
        self._refuse(None, "its lock file keeps changing")

    def release(self):
        """Remove the lock file (while still holding it, so no waiting run takes a removed file)."""
        if self.fd is None:
            return
        with contextlib.suppress(OSError):
            if os.stat(self.path).st_ino == os.fstat(self.fd).st_ino:  # still ours, not a successor's
                os.remove(self.path)
        with contextlib.suppress(OSError):
            os.close(self.fd)
        self.fd = None

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()


# ---------------------------------------------------------------------------------------------
# Runner
# ---------------------------------------------------------------------------------------------

@dataclass
class FleetRun:
    """
    What a fleet run did.

    Attributes
    ----------
    out : str
        The results file.
    summary_csv : str
        The summary table beside it.
    summary : pandas.DataFrame
        The summary (see :func:`summarise`).
    n_homes : int
        Homes in the manifest.
    n_skipped : int
        Homes kept from the output (or its journal), current, and not calculated again.
    n_stale : int
        Homes that had a row whose inputs have changed since (another input fingerprint,
        see :func:`input_fingerprint`): calculated again.
    n_retried : int
        Homes whose earlier error row was dropped by ``retry_errors``: calculated again.
    n_new : int
        Homes with no earlier row.
    n_run : int
        Homes calculated in this run (``n_stale + n_retried + n_new``).
    n_errors : int
        Homes of this run that ended with ``status = "error"``.
    seconds : float
        Wall time of the run. [s]
    """

    out: str
    summary_csv: str
    summary: pd.DataFrame
    n_homes: int
    n_skipped: int
    n_stale: int
    n_retried: int
    n_new: int
    n_run: int
    n_errors: int
    seconds: float


def _check_schema(schema, path):
    names = [name for name, _ in RESULT_COLUMNS]
    found = list(schema.names)
    if found == names:
        return
    if found == [n for n in names if n != "inputs_sha256"]:
        raise InputError(
            "was written by an older thermorc without input fingerprints (column inputs_sha256), so rows whose "
            "inputs have changed cannot be told apart; write to a new --out, or delete it (and its .partial folder) "
            "to calculate every home again", path=path,
        )
    raise InputError(
        "is not a thermorc fleet output of this version (its columns differ; write to a new file, or "
        "delete it to start again)", path=path,
    )


@dataclass
class _Resume:
    """Homes met in earlier rows: ids kept, and ids dropped because stale or retried."""

    done: set = field(default_factory=set)
    stale: set = field(default_factory=set)
    retried: set = field(default_factory=set)


def _carry_over(writer, source, resume, fingerprints, model, retry_errors, out):
    """
    Copy the current rows of an earlier output or journal file, row group by row group.

    A row is dropped when its home already has a row, when its input fingerprint differs
    from the home's fingerprint now (stale), or, with ``retry_errors``, when it is an error.
    Rows of homes no longer in the manifest are kept as they are.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        handle = pq.ParquetFile(source)
    except Exception as exc:  # noqa: BLE001 - pyarrow raises many types for damaged files
        raise InputError(f"cannot read it to resume ({type(exc).__name__}); delete it to start again", path=source) from None
    _check_schema(handle.schema_arrow, source)
    for i in range(handle.num_row_groups):
        table = handle.read_row_group(i)
        asked = set(table.column("model_requested").to_pylist()) - {None}
        if asked and asked != {model}:
            raise InputError(
                f"was made with --model {sorted(asked)[0]}; resume with the same model, or write to a new --out",
                path=out, column="model_requested",
            )
        ids = table.column("home_id").to_pylist()
        stamps = table.column("inputs_sha256").to_pylist()
        status = table.column("status").to_pylist()
        keep = []
        for home_id, stamp, state in zip(ids, stamps, status):
            if home_id in resume.done:
                keep.append(False)
            elif home_id in fingerprints and stamp != fingerprints[home_id]:
                resume.stale.add(home_id)
                keep.append(False)
            elif retry_errors and state == "error":
                resume.retried.add(home_id)
                keep.append(False)
            else:
                keep.append(True)
                # One row per home: a later row of the same home (journal) is dropped above.
                resume.done.add(home_id)
        if not all(keep):
            table = table.filter(pa.array(keep, type=pa.bool_()))
        if table.num_rows:
            writer.write_table(table)


def _write_journal(folder, seq, table):
    import pyarrow.parquet as pq

    from thermorc.write import atomic_write

    os.makedirs(folder, exist_ok=True)
    with atomic_write(os.path.join(folder, f"batch-{seq:06d}-{os.getpid()}-{time.time_ns()}.parquet"), "wb") as handle:
        pq.write_table(table, handle)


# Workers are replaced after this many homes, so that memory a long run leaks (caches,
# fragmentation) stays bounded; a fresh worker costs a fork of the preloaded server.
TASKS_PER_WORKER = 500


def _pool_context():
    """
    Start workers from a clean server process that has imported the calibration chain.

    Forking the runner itself would copy its threads' locks (the progress bar's, Dask's)
    into the workers in whatever state they are; the forkserver start method forks a
    single-threaded server instead (Python documentation, multiprocessing, "Contexts and
    start methods"). Where it is missing (Windows), workers are spawned.
    """
    import multiprocessing

    try:
        ctx = multiprocessing.get_context("forkserver")
    except ValueError:
        return multiprocessing.get_context("spawn")
    ctx.set_forkserver_preload(["thermorc.chain", "thermorc.estimate", "thermorc.fleet"])
    return ctx


class _LocalPool:
    """A process pool; a dead worker process costs its homes, not the run."""

    def __init__(self, workers):
        self.workers = int(workers)
        self.pool = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if self.pool is not None:
            self.pool.shutdown(wait=exc[0] is None, cancel_futures=True)

    def stream(self, homes, kwargs, window):
        """Rows of ``homes`` in their order, with the next ``window`` homes in the workers' queue.

        The queue is topped up as rows come back, so the workers never wait for a batch to
        be written; a row that finishes early waits (at most ``window`` of them) until the
        homes before it are done.
        """
        import concurrent.futures as cf
        from concurrent.futures.process import BrokenProcessPool

        order = _InOrder(homes, window)
        pending = {}
        while True:
            if self.pool is None:
                self.pool = cf.ProcessPoolExecutor(max_workers=self.workers, mp_context=_pool_context(),
                                                   max_tasks_per_child=TASKS_PER_WORKER)
            for i, home in order.take():
                pending[self.pool.submit(calibrate_home, home, **kwargs)] = (i, home)
            if not pending:
                return
            done, _ = cf.wait(pending, return_when=cf.FIRST_COMPLETED)
            broken = False
            for fut in done:
                i, home = pending.pop(fut)
                try:
                    row = fut.result()
                except BrokenProcessPool as exc:
                    broken = True
                    row = _worker_failed(home, kwargs, exc)
                except Exception as exc:  # noqa: BLE001 - e.g. a result that could not be pickled
                    row = _worker_failed(home, kwargs, exc)
                order.done(i, row)
            if broken:
                # A dead worker breaks the pool: the homes it held fail, the rest get a new pool.
                for fut, (i, home) in pending.items():
                    order.done(i, _worker_failed(home, kwargs, BrokenProcessPool("the process pool broke")))
                pending.clear()
                self.pool.shutdown(wait=False, cancel_futures=True)
                self.pool = None
            yield from order.ready()


class _InOrder:
    """Hands out homes and gives back their rows in input order.

    At most ``window`` homes are out between the oldest one whose row is not yet given back
    and the newest one handed out, which bounds both the workers' queue and the rows held.
    """

    def __init__(self, homes, window):
        self.todo = enumerate(homes)
        self.window = max(int(window), 1)
        self.next = 0  # index of the next home to hand out
        self.head = 0  # index of the next row to give back
        self.finished = {}

    def take(self):
        """Homes, as ``(index, home)``, that may go out now."""
        out = list(itertools.islice(self.todo, max(self.head + self.window - self.next, 0)))
        self.next += len(out)
        return out

    def done(self, index, row):
        self.finished[index] = row

    def ready(self):
        """Rows whose homes and all homes before them are done."""
        while self.head in self.finished:
            yield self.finished.pop(self.head)
            self.head += 1


class _DaskPool:
    """An existing Dask distributed cluster, reached through :class:`distributed.Client`."""

    def __init__(self, address):
        self.address = address
        self.client = None

    def __enter__(self):
        import distributed

        try:
            self.client = distributed.Client(self.address, timeout="20s", set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError(f"--scheduler: cannot reach the Dask scheduler at {self.address} ({_one_line(exc, 200)})") from None
        return self

    def __exit__(self, *exc):
        if self.client is not None:
            self.client.close()

    def stream(self, homes, kwargs, window):
        """Rows of ``homes`` in their order, with the next ``window`` homes on the cluster."""
        import distributed

        order = _InOrder(homes, window)
        which = {}
        queue = distributed.as_completed(loop=self.client.loop)

        def submit():
            for i, home in order.take():
                fut = self.client.submit(calibrate_home, home, pure=False, **kwargs)
                which[fut.key] = (i, home)
                queue.add(fut)

        submit()
        for fut in queue:
            i, home = which.pop(fut.key)
            try:
                row = fut.result()
            except Exception as exc:  # noqa: BLE001 - a lost worker costs its homes, not the run
                row = _worker_failed(home, kwargs, exc)
            fut.release()
            order.done(i, row)
            yield from order.ready()
            submit()


def _worker_failed(home, kwargs, exc):
    row = _blank_row(home, kwargs.get("model", "auto"))
    row.update(status="error", error=_one_line(f"the worker running this home failed: {type(exc).__name__}: {exc}"))
    return row


def run_fleet(
    manifest,
    out,
    workers=None,
    scheduler=None,
    model="auto",
    gains="constant",
    test_days=None,
    batch_size=None,
    retry_errors=False,
    on_start=None,
    on_row=None,
):
    """
    Calibrate every home of a manifest and write one row per home to Parquet.

    Parameters
    ----------
    manifest : str, os.PathLike or list of HomeSpec
        Manifest file (see :func:`read_manifest`) or homes already read.
    out : str or os.PathLike
        Results Parquet file. When it exists, or a journal of an interrupted run beside it
        does, the homes in them whose inputs are unchanged (the same
        :func:`input_fingerprint`) are kept and skipped (resume); the others are calculated
        again. The run holds :class:`OutputLock` on ``out`` throughout.
    workers : int, optional
        Processes of the local pool; default :func:`os.cpu_count`.
    scheduler : str, optional
        Address of a running Dask distributed scheduler (e.g. ``tcp://10.0.0.5:8786``); the
        homes run there instead of on a local pool.
    model : {'1R1C', '2R2C', '3R2C', '4R3C', 'auto'}
        Model for every home.
    gains : {'constant', 'day_night', 'four_period'}
        Model of unlogged internal gains.
    test_days : float, optional
        Keep each log's last days back and report how each model predicts them (the
        ``test_*`` columns). [d]
    batch_size : int, optional
        Rows per row group and per journal file; default ``max(32, 8 * workers)``. Up to
        twice as many homes are in the workers' queue at a time, topped up as rows return,
        so an interrupted run loses at most the rows not yet written (under a batch) and the
        homes in flight.
    retry_errors : bool
        Calculate again the homes that ended in error in an earlier run.
    on_start : callable, optional
        Called once as ``on_start(n_to_run, counts)`` before the first batch; ``counts`` has
        the keys ``kept``, ``stale``, ``retried`` and ``new`` (see :class:`FleetRun`).
    on_row : callable, optional
        Called with each new row as it arrives (for a progress bar).

    Returns
    -------
    FleetRun

    Raises
    ------
    InputError
        A bad manifest or option; an output being written by another run (its lock holder
        is named); an output of another version or another ``--model``.
    """
    started = time.perf_counter()
    if model not in _MODELS:
        raise InputError(f"model {model!r} is not known (expected one of {', '.join(_MODELS)})")
    homes = manifest if isinstance(manifest, list) else read_manifest(manifest)
    out = os.path.abspath(os.fspath(out))
    if os.path.isdir(out):
        raise InputError("is a folder (expected a Parquet file to write)", path=out)
    if scheduler is not None and workers is not None:
        raise InputError("--workers sets the local pool; a Dask cluster has its own workers (give one of them)")
    workers = int(workers or os.cpu_count() or 1)
    if workers < 1:
        raise InputError(f"--workers is {workers} (expected 1 or more)")
    batch_size = int(batch_size or max(32, 8 * workers))
    if batch_size < 1:
        raise InputError(f"--batch is {batch_size} (expected 1 or more)")
    if test_days is not None:
        from thermorc.chain import check_test_days

        check_test_days(test_days)
        test_days = float(test_days)
    kwargs = {"model": model, "gains": gains, "test_days": test_days}
    folder = os.path.dirname(out)
    os.makedirs(folder, exist_ok=True)
    with OutputLock(out):
        return _run_locked(homes, out, scheduler, workers, batch_size, retry_errors, kwargs, on_start, on_row, started)


def _run_locked(homes, out, scheduler, workers, batch_size, retry_errors, kwargs, on_start, on_row, started):
    """The body of :func:`run_fleet`, run while holding the output's lock."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    schema = _schema()
    journal = journal_path(out)
    folder = os.path.dirname(out)
    # Hashed before any home runs, so a file changed while its home runs shows next time.
    cache = _DigestCache()
    fingerprints = {h.home_id: input_fingerprint(h, cache=cache, **kwargs) for h in homes}
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix="-" + os.path.basename(out), dir=folder)
    os.close(fd)
    n_run = n_errors = 0
    writer = pq.ParquetWriter(tmp, schema)
    try:
        resume = _Resume()
        sources = [out] if os.path.exists(out) else []
        if os.path.isdir(journal):
            sources += sorted(os.path.join(journal, f) for f in os.listdir(journal) if f.endswith(".parquet"))
        for source in sources:
            _carry_over(writer, source, resume, fingerprints, kwargs["model"], retry_errors, out)
        todo = [h for h in homes if h.home_id not in resume.done]
        counts = {"kept": len(homes) - len(todo), "stale": 0, "retried": 0, "new": 0}
        for h in todo:
            kind = "stale" if h.home_id in resume.stale else "retried" if h.home_id in resume.retried else "new"
            counts[kind] += 1
        pool = _DaskPool(scheduler) if scheduler is not None else _LocalPool(min(workers, max(len(todo), 1)))
        with pool:
            if on_start is not None:
                on_start(len(todo), dict(counts))
            # Rows are written every batch_size homes, in manifest order, while the pool
            # already works on the next ones.
            rows = []
            seq = 0

            def flush():
                nonlocal seq, n_run, n_errors
                table = pa.Table.from_pylist(rows, schema=schema)
                _write_journal(journal, seq, table)
                writer.write_table(table)
                n_run += len(rows)
                n_errors += sum(r["status"] == "error" for r in rows)
                rows.clear()
                seq += 1

            for row in pool.stream(todo, kwargs, window=2 * batch_size):
                row["inputs_sha256"] = fingerprints[row["home_id"]]
                rows.append(row)
                if on_row is not None:
                    on_row(row)
                if len(rows) >= batch_size:
                    flush()
            if rows:
                flush()
        writer.close()
        writer = None
        os.replace(tmp, out)
    except BaseException:
        if writer is not None:
            writer.close()
        with contextlib.suppress(FileNotFoundError):
            os.remove(tmp)
        raise
    # The output now holds every journal row; the journal has done its job.
    shutil.rmtree(journal, ignore_errors=True)
    summary = summarise(out)
    csv_path = summary_path(out)
    from thermorc.write import write_csv

    write_csv(csv_path, summary, index=False)
    return FleetRun(
        out=out, summary_csv=csv_path, summary=summary, n_homes=len(homes), n_skipped=counts["kept"],
        n_stale=counts["stale"], n_retried=counts["retried"], n_new=counts["new"], n_run=n_run,
        n_errors=n_errors, seconds=time.perf_counter() - started,
    )


# ---------------------------------------------------------------------------------------------
# Summary
# ---------------------------------------------------------------------------------------------

#: Quantities described by the summary, with their unit.
SUMMARY_QUANTITIES = (
    ("ua_w_per_k", "W/K"),
    ("ua_per_floor_area_w_per_m2k", "W/m2K"),
    ("tau1_h", "h"),
    ("tau2_h", "h"),
    ("capacitance_j_per_k", "J/K"),
    ("cv_rmse_pct", "%"),
    ("nmbe_pct", "%"),
    ("rmse_k", "K"),
    ("heating_share", "1"),
    ("test_rmse_k", "K"),
    ("test_bias_k", "K"),
    ("test_cv_rmse_pct", "%"),
    ("test_nmbe_pct", "%"),
    ("seconds", "s"),
)


def summarise(results):
    """
    Distribution of fleet results: count, mean and percentiles of each quantity.

    Parameters
    ----------
    results : str, os.PathLike or pandas.DataFrame
        A fleet results Parquet file (only the columns needed are read) or its table.

    Returns
    -------
    pandas.DataFrame
        One row per quantity of :data:`SUMMARY_QUANTITIES` (the ``test_*`` ones only when
        the results hold held-out figures) over the homes with status ``ok`` (``quantity``, ``unit``, ``count``, ``mean``, ``p10``, ``p50``, ``p90``,
        ``min``, ``max``), then counts: ``homes``, ``homes_ok``, ``homes_error``,
        ``homes_flagged`` (calibrated, with at least one warning about the fit),
        ``homes_heating_share_low`` (calibrated, the metered heating below
        :data:`thermorc.estimate.MIN_HEATING_SHARE` of the heat: UA not identifiable),
        ``homes_test_outside_hourly_limits`` (a run with ``test_days`` only: the held-out
        days' hourly heating energy outside ASHRAE Guideline 14's CV(RMSE) 30 % / NMBE
        ±10 %) and ``model_<name>`` for each chosen model.

    Notes
    -----
    Percentiles are :func:`numpy.percentile` with linear interpolation between order
    statistics (R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages," The
    American Statistician, vol. 50, no. 4, pp. 361-365, 1996, definition 7).
    """
    from thermorc.diagnose import GUIDELINE14
    from thermorc.estimate import MIN_HEATING_SHARE

    columns = [q for q, _ in SUMMARY_QUANTITIES] + ["status", "n_warnings", "model"]
    if isinstance(results, pd.DataFrame):
        frame = results.reindex(columns=columns)
    else:
        import pyarrow.parquet as pq

        # Outputs of an older version lack the newer columns: summarise what they hold.
        present = set(pq.read_schema(results).names)
        frame = pd.read_parquet(results, columns=[c for c in columns if c in present]).reindex(columns=columns)
    ok = frame[frame["status"] == "ok"]
    rows = []
    for name, unit in SUMMARY_QUANTITIES:
        v = pd.to_numeric(ok[name], errors="coerce").to_numpy(dtype=float)
        v = v[np.isfinite(v)]
        if name.startswith("test_") and not v.size:
            continue  # a run without --test-days
        stats = {"quantity": name, "unit": unit, "count": int(v.size)}
        if v.size:
            p10, p50, p90 = np.percentile(v, [10, 50, 90])
            stats.update(mean=float(v.mean()), p10=float(p10), p50=float(p50), p90=float(p90), min=float(v.min()), max=float(v.max()))
        rows.append(stats)
    counts = [
        ("homes", len(frame)),
        ("homes_ok", len(ok)),
        ("homes_error", int((frame["status"] == "error").sum())),
        ("homes_flagged", int((ok["n_warnings"].fillna(0) > 0).sum())),
        ("homes_heating_share_low", int((pd.to_numeric(ok["heating_share"], errors="coerce") < MIN_HEATING_SHARE).sum())),
    ]
    if ok["test_cv_rmse_pct"].notna().any():
        limits = GUIDELINE14["hourly"]
        cv = pd.to_numeric(ok["test_cv_rmse_pct"], errors="coerce")
        nmbe = pd.to_numeric(ok["test_nmbe_pct"], errors="coerce")
        counts.append(("homes_test_outside_hourly_limits",
                       int(((cv > limits["cv_rmse_pct"]) | (nmbe.abs() > limits["nmbe_pct"])).sum())))
    for name, n in ok["model"].value_counts().sort_index().items():
        counts.append((f"model_{name}", int(n)))
    rows += [{"quantity": name, "unit": "homes", "count": n} for name, n in counts]
    table = pd.DataFrame(rows, columns=["quantity", "unit", "count", "mean", "p10", "p50", "p90", "min", "max"])
    table["count"] = table["count"].astype("int64")
    return table


def home_dict(home):
    """A :class:`HomeSpec` as a plain dict (for logs and tests)."""
    return asdict(home)
