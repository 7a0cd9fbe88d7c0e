"""``thermorc forecast`` and ``thermorc setback``: exit codes, one-line errors, no output after a
failure (typer's testing docs, docs/tutorial/testing.md), and the files holding what the library
computes."""

import json
import pathlib
import shutil

import pandas as pd
import pvlib
import pytest
from typer.testing import CliRunner

from thermorc.cli import app
from thermorc.forecast import forecast
from thermorc.read import read_weather
from thermorc.result import CalibrationResult
from thermorc.write import write_json

TMY3 = pathlib.Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"
EXAMPLES = pathlib.Path(__file__).parents[1] / "docs" / "examples"

runner = CliRunner()


def _result():
    return CalibrationResult(
        model="2R2C",
        parameters=dict(r_indoor_envelope_k_per_w=1 / 2500.0, r_envelope_outdoor_k_per_w=1 / 250.0 - 1 / 2500.0,
                        c_indoor_j_per_k=3e6, c_envelope_j_per_k=2.4e7, solar_aperture_m2=3.0,
                        internal_gains_w=400.0),
        covariance={"names": ["r_envelope_outdoor_k_per_w"], "space": "log", "matrix": [[0.05**2]]},
    )


@pytest.fixture
def result_json(tmp_path):
    path = tmp_path / "result.json"
    write_json(path, _result().to_dict())
    return path


def test_forecast_writes_csv_and_summary(tmp_path, result_json):
    out, summary = tmp_path / "forecast.csv", tmp_path / "summary.json"
    r = runner.invoke(app, ["forecast", str(result_json), "--weather", str(TMY3), "--schedule",
                            str(EXAMPLES / "schedule.toml"), "--capacity-w", "10000", "--draws", "3",
                            "--out", str(out), "--summary", str(summary)])
    assert r.exit_code == 0, r.output
    body = json.loads(summary.read_text())
    for key in ("heating_kwh", "peak_heating_w", "unmet_hours", "unmet_tolerance_k", "monthly_kwh", "design",
                "degree_hours", "monte_carlo", "cautions"):
        assert key in body
    assert body["unmet_tolerance_k"] == 0.5
    assert body["monte_carlo"]["n_draws"] == 3
    frame = pd.read_csv(out, index_col="time")
    assert len(frame) == 365 * 288
    assert frame.index[0] == "1990-01-01T00:00:00-05:00"
    # The CLI adds no physics: the file holds what the library finds.
    weather, meta = read_weather(TMY3)
    from thermorc.schedule import read_schedule

    direct = forecast(_result(), weather, read_schedule(EXAMPLES / "schedule.toml"), capacity_w=10000.0)
    assert body["heating_kwh"] == pytest.approx(direct.summary["heating_kwh"], rel=1e-9)
    assert frame["heating_w"].sum() * 300 / 3.6e6 == pytest.approx(body["heating_kwh"], rel=1e-5)
    assert "licensed professional" in r.stdout and "Design load" in r.stdout


def test_forecast_json_and_quiet(tmp_path, result_json):
    out = tmp_path / "f.csv"
    r = runner.invoke(app, ["forecast", str(result_json), "--weather", str(TMY3), "--setpoint", "19",
                            "--draws", "0", "--out", str(out), "--json"])
    assert r.exit_code == 0, r.output
    body = json.loads(r.stdout)
    assert body["monte_carlo"] is None and body["design"]["setpoint_c"] == 19.0
    r = runner.invoke(app, ["forecast", str(result_json), "--weather", str(TMY3), "--draws", "0", "--out",
                            str(out), "--quiet"])
    assert r.exit_code == 0 and r.stdout == ""


@pytest.mark.parametrize(
    "extra, needle",
    [
        (["--setpoint", "20", "--schedule", "X"], "give --setpoint or --schedule, not both"),
        (["--heater", "thermostat"], "needs a capacity"),
        (["--capacity-w", "5000", "--heater", "ideal"], "capacity was given for the ideal heater"),
        (["--step-s", "700"], "does not divide one hour"),
    ],
)
def test_forecast_bad_options_one_line_exit_2(tmp_path, result_json, extra, needle):
    out, summary = tmp_path / "f.csv", tmp_path / "s.json"
    args = ["forecast", str(result_json), "--weather", str(TMY3), "--draws", "0", "--out", str(out),
            "--summary", str(summary), *extra]
    r = runner.invoke(app, args)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: ") and needle in lines[0]
    assert not out.exists() and not summary.exists()


def test_forecast_bad_schedule_names_file_and_key(tmp_path, result_json):
    bad = tmp_path / "sched.toml"
    bad.write_text('[week]\nweekdays = [["06:30", 20.0]]\n')
    out = tmp_path / "f.csv"
    r = runner.invoke(app, ["forecast", str(result_json), "--weather", str(TMY3), "--schedule", str(bad),
                            "--out", str(out)])
    assert r.exit_code == 2
    assert r.stderr.strip() == ("thermorc: error: sched.toml, column 'week': no program for saturday, sunday "
                                "(expected every weekday covered by a day or a group: weekdays, weekend, everyday)")
    assert not out.exists()


def test_forecast_bad_result_file(tmp_path):
    bad = tmp_path / "result.json"
    bad.write_text('{"model": "4R4C", "parameters": {}}')
    r = runner.invoke(app, ["forecast", str(bad), "--weather", str(TMY3), "--out", str(tmp_path / "f.csv")])
    assert r.exit_code == 2 and "result.json, column 'model'" in r.stderr
    assert not (tmp_path / "f.csv").exists()


def test_setback_compares_the_example_strategies(tmp_path, result_json):
    # The example files refer to each other by relative path; copy both.
    for name in ("schedule.toml", "strategies.toml"):
        shutil.copy(EXAMPLES / name, tmp_path / name)
    out, summary = tmp_path / "cmp.csv", tmp_path / "cmp.json"
    r = runner.invoke(app, ["setback", str(result_json), "--weather", str(TMY3), "--strategies",
                            str(tmp_path / "strategies.toml"), "--out", str(out), "--summary", str(summary)])
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out, index_col="strategy")
    assert table.index[0] == "steady 20.5" and table["savings_pct"].iloc[0] == 0
    assert (table["savings_pct"].iloc[1:] > 0).all()
    body = json.loads(summary.read_text())
    optimal = body["details"]["night 16.0, optimal start"]
    assert optimal["optimal_start"] and len(optimal["latest_starts"]) == 365
    assert "WHO" in r.stdout and "licensed professional" in r.stdout


def test_setback_bad_strategies_file(tmp_path, result_json):
    bad = tmp_path / "strategies.toml"
    bad.write_text('[baseline]\nconstant_c = 20.0\n[[strategy]]\nname = "x"\noptimal_start = "yes"\nconstant_c = 17\n')
    out = tmp_path / "cmp.csv"
    r = runner.invoke(app, ["setback", str(result_json), "--weather", str(TMY3), "--strategies", str(bad),
                            "--out", str(out)])
    assert r.exit_code == 2
    assert r.stderr.strip() == "thermorc: error: strategies.toml, column 'strategy[0].optimal_start': 'yes' is not true or false"
    assert not out.exists()
