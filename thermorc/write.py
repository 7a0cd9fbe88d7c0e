"""
Output edge: atomic file writes and spreadsheet-safe CSV.

Every file thermorc writes goes to a temporary file in the target's folder first and is then
renamed into place with :func:`os.replace`, which is atomic on POSIX and Windows for a
target on the same file system (common practice). An interrupted run leaves either the old
file or the new one, never half of one.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import tempfile

import numpy as np
import pandas as pd

__all__ = ["atomic_write", "write_text", "write_bytes", "write_json", "write_csv", "escape_cell"]

# Cells starting with these can be run as formulas by spreadsheet programs (OWASP, "CSV
# Injection", https://owasp.org/www-community/attacks/CSV_Injection).
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


@contextlib.contextmanager
def atomic_write(path, mode="w", encoding="utf-8"):
    """
    Open a temporary file beside ``path`` and move it onto ``path`` only on success.

    Parameters
    ----------
    path : str or os.PathLike
        Target file.
    mode : {'w', 'wb'}
        Text or binary.
    encoding : str
        Text encoding (text mode only).

    Yields
    ------
    file object
        Write to it; on an exception the temporary file is removed and ``path`` is untouched.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix="-" + os.path.basename(path), dir=folder)
    try:
        kwargs = {} if "b" in mode else {"encoding": encoding, "newline": ""}
        with os.fdopen(fd, mode, **kwargs) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.remove(tmp)
        raise


def write_text(path, text):
    """Write ``text`` to ``path`` atomically (UTF-8)."""
    with atomic_write(path, "w") as handle:
        handle.write(text)


def write_bytes(path, data):
    """Write ``data`` to ``path`` atomically."""
    with atomic_write(path, "wb") as handle:
        handle.write(data)


def _json_default(value):
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return _finite_or_none(float(value))
    if isinstance(value, np.ndarray):
        return [_json_default(v) if not isinstance(v, (int, float)) else v for v in value.tolist()]
    if isinstance(value, (pd.Timestamp,)):
        return value.isoformat()
    if isinstance(value, (np.bool_,)):
        return bool(value)
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def _finite_or_none(x):
    return x if math.isfinite(x) else None


def _clean_for_json(obj):
    # JSON has no NaN or infinity; strict readers reject them, so they become null.
    if isinstance(obj, float):
        return _finite_or_none(obj)
    if isinstance(obj, dict):
        return {str(k): _clean_for_json(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean_for_json(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _clean_for_json(obj.tolist())
    if isinstance(obj, np.floating):
        return _finite_or_none(float(obj))
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def write_json(path, obj):
    """
    Write ``obj`` as indented JSON, atomically; NaN and infinities become ``null``.

    Parameters
    ----------
    path : str or os.PathLike
        Target file.
    obj : dict or list
        Data; numpy scalars and arrays and pandas timestamps are converted.
    """
    text = json.dumps(_clean_for_json(obj), indent=2, default=_json_default, allow_nan=False)
    write_text(path, text + "\n")


def escape_cell(value):
    """
    Make one text cell safe to open in a spreadsheet.

    Parameters
    ----------
    value : object
        Cell value. Only strings are changed.

    Returns
    -------
    object
        ``value``, with a leading apostrophe when it is a string that starts like a formula.
    """
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def write_csv(path, frame, index=True, float_format="%.6g"):
    """
    Write a DataFrame as CSV atomically, with text cells escaped against formula injection.

    Parameters
    ----------
    path : str or os.PathLike
        Target file.
    frame : pandas.DataFrame
        Data. A tz-aware index is written in ISO 8601 with its UTC offset.
    index : bool
        Write the index as the first column.
    float_format : str
        printf-style format for floats.
    """
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col]):
            out[col] = out[col].map(escape_cell)
    if index and (out.index.dtype == object or pd.api.types.is_string_dtype(out.index)):
        out.index = out.index.map(escape_cell)
    if isinstance(out.index, pd.DatetimeIndex):
        name = out.index.name
        out.index = pd.Index([t.isoformat() for t in out.index], name=name)
    out.columns = [escape_cell(str(c)) for c in out.columns]
    buffer = io.StringIO()
    out.to_csv(buffer, index=index, float_format=float_format)
    write_text(path, buffer.getvalue())
