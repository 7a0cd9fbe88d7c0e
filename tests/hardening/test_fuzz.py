"""
A bounded fuzz of the readers: every input ends in a parsed result or an InputError.

Inputs are hypothesis-drawn bytes, and mutations of valid files (lines dropped, repeated or
swapped, cells replaced by hostile text), which reach deeper into the readers than random
bytes do. Any other exception is a bug (the contract of thermorc.errors). The default run
takes a few seconds; set THERMORC_FUZZ_EXAMPLES (examples per reader) to run longer, e.g.
THERMORC_FUZZ_EXAMPLES=5000 .venv/bin/python -m pytest tests/hardening/test_fuzz.py
"""

from __future__ import annotations

import os
import tempfile

import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.hardening.conftest import DATA, EXAMPLES, GOOD_LOG, GOOD_WEATHER
from thermorc.errors import InputError

EXAMPLES_PER_READER = int(os.environ.get("THERMORC_FUZZ_EXAMPLES", "60"))
FUZZ = settings(max_examples=EXAMPLES_PER_READER, deadline=None, derandomize="THERMORC_FUZZ_EXAMPLES" not in os.environ,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

HOSTILE_CELLS = ["", "nan", "NaN", "inf", "-inf", "1e308", "-1e308", "1e999", "0", "-0", "=1+1",
                 "=cmd|' /C calc'!A0", "+1", "-1-1", "@A1", "\x00", "\ufeff", "é", "9" * 400, "1,5", "1;5",
                 '"', "'", "2024-13-45T99:99", "1066-10-14T09:00Z", "9999-12-31T23:59:59+14:00",
                 "2024-03-10T02:30", "\t", " ", "\r"]


def _lines_strategy(text):
    lines = text.splitlines()
    return st.lists(st.sampled_from(lines), min_size=0, max_size=len(lines) + 8)


@st.composite
def mutated(draw, text, delimiter=","):
    """A valid file with some lines dropped, repeated or reordered and some cells replaced."""
    lines = text.splitlines()
    if draw(st.booleans()):
        lines = draw(_lines_strategy(text))
    out = []
    for line in lines:
        cells = line.split(delimiter)
        for i in range(len(cells)):
            if draw(st.integers(0, 9)) == 0:
                cells[i] = draw(st.one_of(st.sampled_from(HOSTILE_CELLS), st.text(max_size=12)))
        out.append(delimiter.join(cells))
    data = "\n".join(out).encode("utf-8", "surrogatepass")
    if draw(st.integers(0, 5)) == 0:
        cut = draw(st.integers(0, len(data)))
        data = data[:cut]
    return data


def _contents(valid_text, delimiter=","):
    return st.one_of(st.binary(max_size=600), mutated(valid_text, delimiter))


def _run(reader, data, suffix):
    """Write ``data`` to a temporary file and read it: InputError is the only failure allowed."""
    fd, path = tempfile.mkstemp(suffix=suffix)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        try:
            return reader(path)
        except InputError as exc:
            assert "\n" not in str(exc)
            return None
    finally:
        os.remove(path)


@FUZZ
@given(_contents(GOOD_LOG))
def test_fuzz_log_reader(data):
    from thermorc.read import read_log

    found = _run(read_log, data, ".csv")
    if found is not None:
        frame, meta = found
        assert isinstance(frame.index, pd.DatetimeIndex) and frame.index.tz is not None
        assert frame.index.is_monotonic_increasing and frame.index.is_unique
        # Whatever was parsed is physical: no infinities, no negative heating (the range checks).
        assert not frame.isin([float("inf"), float("-inf")]).any().any()
        assert (frame["heating_w"].dropna() >= 0).all()


_LOGGER = (DATA / "invented_logger.csv").read_text(encoding="utf-8")
_MAP = (DATA / "invented_logger_map.toml").read_text(encoding="utf-8")


@FUZZ
@given(_contents(_LOGGER, ";"))
def test_fuzz_log_reader_with_a_column_map(data):
    from thermorc.read import read_log

    _run(lambda p: read_log(p, column_map=DATA / "invented_logger_map.toml"), data, ".csv")


@FUZZ
@given(_contents(GOOD_WEATHER))
def test_fuzz_weather_csv_reader(data):
    from thermorc.read import read_weather

    _run(read_weather, data, ".csv")


def _toml_mutations(text):
    # For TOML, mutate values after '=' (a cell is the text after the first '=').
    return _contents(text, "=")


TOML_READERS = {
    "column_map": (lambda p: __import__("thermorc.read", fromlist=["x"]).load_column_map(p), _MAP),
    "construction": (lambda p: __import__("thermorc.construction", fromlist=["x"]).read_construction(p),
                     (DATA / "construction_handcalc.toml").read_text(encoding="utf-8")),
    "schedule": (lambda p: __import__("thermorc.schedule", fromlist=["x"]).read_schedule(p),
                 (EXAMPLES / "schedule.toml").read_text(encoding="utf-8")),
    "strategies": (lambda p: __import__("thermorc.setback", fromlist=["x"]).read_strategies(p),
                   (EXAMPLES / "strategies.toml").read_text(encoding="utf-8").replace(
                       'schedule_file = "schedule.toml"', 'constant_c = 18.0')),
    "home": (lambda p: __import__("thermorc.report", fromlist=["x"]).read_home(p),
             '[log]\nfile = "nowhere.csv"\ntz = "UTC"\n[model]\npreset = "auto"\nstep_min = 5\n'),
    "manifest": (lambda p: __import__("thermorc.fleet", fromlist=["x"]).read_manifest(p),
                 '[defaults]\ntz = "UTC"\n[[home]]\nid = "a"\nlog = "a.csv"\nfloor_area_m2 = 90\n'
                 '[[home]]\nid = "b"\nlog = "b.csv"\nsite = "45.0,-90.0"\n'),
}


def _toml_test(kind):
    reader, valid = TOML_READERS[kind]

    @FUZZ
    @given(_toml_mutations(valid))
    def check(data):
        _run(reader, data, ".toml")

    check.__name__ = f"test_fuzz_{kind}_reader"
    return check


for _kind in TOML_READERS:
    globals()[f"test_fuzz_{_kind}_reader"] = _toml_test(_kind)


@FUZZ
@given(_contents(__import__("json").dumps(
    __import__("tests.hardening.conftest", fromlist=["x"]).good_result().to_dict(), indent=1), ":"))
def test_fuzz_result_json_reader(data):
    from thermorc.result import CalibrationResult

    _run(CalibrationResult.from_json, data, ".json")


# Integers beyond the float range (TOML and JSON allow any size): found by the fuzz above in the
# manifest reader, then checked in every reader of numbers.
BIG = "1" + "0" * 400
_STRATEGIES = (EXAMPLES / "strategies.toml").read_text(encoding="utf-8").replace(
    'schedule_file = "schedule.toml"', "constant_c = 18.0")
HUGE_INTEGER_CASES = {
    "construction_floor_area": ("thermorc.construction:read_construction", DATA / "construction_handcalc.toml",
                                "floor_area_m2 = 40.0", "floor_area_m2"),
    "construction_thickness": ("thermorc.construction:read_construction", DATA / "construction_handcalc.toml",
                               "thickness_m = 0.0125", "thickness_m"),
    "schedule_level": ("thermorc.schedule:read_schedule", EXAMPLES / "schedule.toml", "day_c = 20.5", "day_c"),
    "strategies_capacity": ("thermorc.setback:read_strategies", _STRATEGIES, "capacity_w = 10000.0", "capacity_w"),
    "map_rating": ("thermorc.read:load_column_map", DATA / "invented_logger_map.toml", "rating = 40000", "rating"),
    "map_cop": ("thermorc.read:load_column_map", DATA / "invented_logger_map.toml", "[10.0, 4.0]", "cop"),
    "manifest_floor_area": ("thermorc.fleet:read_manifest", '[[home]]\nid = "a"\nlog = "a.csv"\nfloor_area_m2 = 90\n',
                            "floor_area_m2 = 90", "floor_area_m2"),
}


import pytest  # noqa: E402


@pytest.mark.parametrize("case", sorted(HUGE_INTEGER_CASES))
def test_integers_beyond_the_float_range_are_input_errors(tmp_path, case):
    import importlib

    where, source, old, key = HUGE_INTEGER_CASES[case]
    text = source if isinstance(source, str) else source.read_text(encoding="utf-8")
    assert old in text
    new = old.replace(old.split("=")[-1].strip(), BIG) if "=" in old else old.replace("10.0", BIG)
    path = tmp_path / "huge.toml"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    module, name = where.split(":")
    with pytest.raises(InputError) as exc:
        getattr(importlib.import_module(module), name)(path)
    assert key in (exc.value.column or "")


def test_result_json_integer_beyond_the_float_range(tmp_path):
    import json

    from tests.hardening.conftest import good_result
    from thermorc.result import CalibrationResult

    text = json.dumps(good_result().to_dict()).replace('"c_indoor_j_per_k": 3000000.0', f'"c_indoor_j_per_k": {BIG}')
    path = tmp_path / "result.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as exc:
        CalibrationResult.from_json(path)
    assert exc.value.column == "parameters.c_indoor_j_per_k"
