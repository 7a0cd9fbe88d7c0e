"""Shared pieces of the hardening tests: valid companion files, a CLI runner and folder snapshots."""

from __future__ import annotations

import os
import pathlib
import re

import pvlib
import pytest
from typer.testing import CliRunner

from thermorc.result import CalibrationResult
from thermorc.write import write_json

ROOT = pathlib.Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data"
EXAMPLES = ROOT / "docs" / "examples"
# Real open data shipped by pvlib (Greensboro NC TMY3), used as a valid weather file.
TMY3 = pathlib.Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"

runner = CliRunner()

#: A valid canonical log: 6 h at 15 min (docs/data-formats.md).
GOOD_LOG = "time,indoor_c,heating_w,outdoor_c\n" + "".join(
    f"2024-01-10T{h:02d}:{m:02d}-05:00,{20 + 0.1 * (m // 15)},{1000 * (m == 0)},2.0\n"
    for h in range(6) for m in (0, 15, 30, 45))

#: A valid canonical weather CSV (docs/data-formats.md): two days, hourly.
GOOD_WEATHER = "# latitude = 36.1\n# longitude = -79.9\ntime,outdoor_c,ghi_w_m2\n" + "".join(
    f"2024-01-{d:02d}T{h:02d}:00-05:00,{2 + h / 10:.1f},{max(0, 400 - 40 * abs(h - 12))}\n"
    for d in (10, 11) for h in range(24))

#: A valid TOML manifest line set (docs/fleet.md).
GOOD_MANIFEST_CSV = "id,log,tz\nqh-001,log.csv,America/New_York\n"


def good_result():
    """A plausible 2R2C calibration (the numbers are invented, of the order of a small home)."""
    return CalibrationResult(
        model="2R2C",
        parameters=dict(r_indoor_envelope_k_per_w=1 / 2500.0, r_envelope_outdoor_k_per_w=1 / 250.0 - 1 / 2500.0,
                        c_indoor_j_per_k=3e6, c_envelope_j_per_k=2.4e7, solar_aperture_m2=3.0,
                        internal_gains_w=400.0),
        covariance={"names": ["r_envelope_outdoor_k_per_w"], "space": "log", "matrix": [[0.05**2]]},
    )


def write_good_result(path):
    write_json(path, good_result().to_dict())
    return path


def snapshot(folder):
    """Every file under ``folder`` with its bytes (sorted), to compare before and after a run."""
    found = {}
    for base, dirs, files in os.walk(folder):
        dirs.sort()
        for name in sorted(files):
            full = os.path.join(base, name)
            with open(full, "rb") as handle:
                found[os.path.relpath(full, folder)] = handle.read()
    return found


#: A place in the error line: a row or a column/key.
PLACE = re.compile(r"row \d+|column '[^']+'")


def assert_one_line_error(result, name, place=True, needle=None):
    """Exit 2, exactly one stderr line 'thermorc: error: NAME ...', no traceback."""
    text = result.stderr
    assert result.exit_code == 2, (result.exit_code, text, result.stdout[-2000:])
    assert "Traceback" not in result.output and "Traceback" not in text
    lines = [line for line in text.splitlines() if line.strip()]
    assert len(lines) == 1, lines
    line = lines[0]
    assert line.startswith("thermorc: error: "), line
    assert name in line, (name, line)
    if place:
        assert PLACE.search(line), line
    if needle is not None:
        assert re.search(needle, line), (needle, line)
    return line


@pytest.fixture
def cli():
    return runner
