"""The ground-temperature input: calibrate and simulate from the command line, forecasts, bad input."""

import json
import sys
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from thermorc.cli import app
from thermorc.construction import parse_construction
from thermorc.write import write_csv

sys.path.insert(0, str(Path(__file__).parent))
from test_estimate import ground_log  # noqa: E402

runner = CliRunner()



def insulated_element(name, kind, area_m2, thickness_m):
    """A construction TOML element of one insulation layer (k 0.04 W/(m K); invented)."""
    return (f'[[elements]]\nname = "{name}"\nkind = "{kind}"\narea_m2 = {area_m2}\n'
            f'  [[elements.layers]]\n  name = "insulation"\n  thickness_m = {thickness_m}\n'
            "  conductivity_w_per_mk = 0.04\n  density_kg_per_m3 = 30.0\n  specific_heat_j_per_kgk = 1000.0\n")


# An invented box with one ground floor; the U-values are worked by hand below.
CONSTRUCTION = (
    'name = "ground-floor box (invented)"\nfloor_area_m2 = 50.0\n[air_leakage]\nach = 0.5\nvolume_m3 = 125.0\n'
    + insulated_element("wall", "external_wall", 80.0, 0.10)
    + insulated_element("slab on ground", "ground_floor", 50.0, 0.08)
)


@pytest.fixture(scope="module")
def log_csv(tmp_path_factory):
    log, _ = ground_log(seed=4)
    path = tmp_path_factory.mktemp("ground") / "log.csv"
    write_csv(path, log.rename_axis("time"), float_format="%.10g")
    return path


def test_calibrate_with_ground_then_simulate(log_csv, tmp_path):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--ground-c", "8", "--ground-share", "0.3",
                            "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "to the ground at 8.0 °C" in r.stdout
    body = json.loads(out.read_text(encoding="utf-8"))
    ground = body["ground"]
    assert ground["temperature_c"] == 8.0 and ground["share"] == 0.3
    assert ground["ua_ground_w_per_k"] == pytest.approx(0.3 * body["heat_loss_coefficient_w_per_k"])
    sim = tmp_path / "SIM.csv"
    r = runner.invoke(app, ["simulate", str(out), "--log", str(log_csv), "--out", str(sim)])
    assert r.exit_code == 0, r.output
    frame = pd.read_csv(sim)
    measured = pd.read_csv(log_csv)["indoor_c"]
    assert ((frame["indoor_c"] - measured) ** 2).mean() ** 0.5 < 0.1  # 0.05 K noise in the log


def test_ground_share_comes_from_the_construction(log_csv, tmp_path):
    # ISO 6946: U = 1 / (R_si + d/k + R_se); R_si 0.13 horizontal, 0.17 downward, R_se 0.04.
    u_wall = 1 / (0.13 + 0.10 / 0.04 + 0.04)
    u_floor = 1 / (0.17 + 0.08 / 0.04 + 0.04)
    leak = 1200 * 0.5 * 125 / 3600  # H_ve = rho c ACH V / 3600 (ISO 13790, from memory)
    share = 50 * u_floor / (80 * u_wall + 50 * u_floor + leak)
    path = tmp_path / "house.toml"
    path.write_text(CONSTRUCTION, encoding="utf-8")
    parse_construction(__import__("tomllib").loads(CONSTRUCTION))  # the file itself is valid
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--ground-c", "8", "--construction", str(path),
                            "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    assert json.loads(out.read_text(encoding="utf-8"))["ground"]["share"] == pytest.approx(share, rel=1e-9)


@pytest.mark.parametrize("args, message", [
    (["--ground-c", "8"], "--ground-c needs the share of the heat loss"),
    (["--ground-share", "0.3"], "ground_share (--ground-share) needs ground_c (--ground-c) too"),
    (["--ground-c", "8", "--ground-share", "1.5"], "outside 0..0.9"),
    (["--ground-c", "80", "--ground-share", "0.2"], "is not plausible"),
])
def test_bad_ground_options_are_one_line_exit_2_and_no_output(log_csv, tmp_path, args, message):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", *args, "--out", str(out)])
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0], r.stderr
    assert not out.exists()


def test_forecast_heat_differs_by_the_ground_loss(log_csv, tmp_path):
    # First law: with the heater on all the time, the mean heat of the same model with its
    # ground share sent to outdoor air instead grows by UA_ground * mean(T_ground - T_outdoor)
    # over the month (heat stored in the nodes only moves it by their change of state).
    from thermorc import forecast
    from thermorc.read import read_weather
    from thermorc.result import CalibrationResult

    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--ground-c", "8", "--ground-share", "0.3",
                            "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    result = CalibrationResult.from_json(out)
    weather = read_weather(Path(__file__).parents[1] / "weather_demo" / "weather.csv")[0].iloc[: 24 * 31]
    with_ground = forecast.forecast(result, weather, setpoint=20.0).frame
    all_outdoor = forecast.forecast(CalibrationResult.from_dict({**result.to_dict(), "ground": {}}), weather,
                                    setpoint=20.0).frame
    assert (with_ground["heating_w"] > 0).all() and (all_outdoor["heating_w"] > 0).all()
    expected = result.ground["ua_ground_w_per_k"] * (8.0 - with_ground["outdoor_c"].mean())
    difference = all_outdoor["heating_w"].mean() - with_ground["heating_w"].mean()
    assert difference == pytest.approx(expected, rel=0.01)


@pytest.mark.parametrize("ground, where", [
    ({"temperature_c": 8.0, "share": 1.5, "ua_outdoor_w_per_k": 1.0, "ua_ground_w_per_k": 1.0}, "ground.share"),
    ({"temperature_c": "warm", "share": 0.2, "ua_outdoor_w_per_k": 1.0, "ua_ground_w_per_k": 1.0}, "ground.temperature_c"),
    ([8.0, 0.2], "ground"),
])
def test_a_damaged_ground_record_is_refused_in_one_line(log_csv, tmp_path, ground, where):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "1R1C", "--ground-c", "8", "--ground-share", "0.3",
                            "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    body = json.loads(out.read_text(encoding="utf-8"))
    body["ground"] = ground
    out.write_text(json.dumps(body), encoding="utf-8")
    sim = tmp_path / "SIM.csv"
    r = runner.invoke(app, ["simulate", str(out), "--log", str(log_csv), "--out", str(sim)])
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and f"RESULT.json, column '{where}'" in lines[0], r.stderr
    assert not sim.exists()


def test_a_home_file_ground_reaches_the_calibration(tmp_path):
    # The report calibrates as calibrate --ground-c/--ground-share does on the same log.
    import warnings

    from thermorc.chain import calibrate_files
    from thermorc.report import _calibrate, parse_home

    log, _ = ground_log(seed=4, days=10)
    write_csv(tmp_path / "log.csv", log.rename_axis("time"), float_format="%.10g")
    home = parse_home({"log": {"file": "log.csv"}, "ground_c": 8, "ground_share": 0.3, "model": {"preset": "2R2C"}},
                      path=str(tmp_path / "home.toml"))
    assert (home.ground_c, home.ground_share) == (8.0, 0.3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = _calibrate(home, lambda *_: None)
        want = calibrate_files(tmp_path / "log.csv", model="2R2C", ground_c=8.0, ground_share=0.3)
    assert got.ground["share"] == 0.3 and got.heat_loss_coefficient_w_per_k == pytest.approx(
        want.heat_loss_coefficient_w_per_k, rel=1e-9)
