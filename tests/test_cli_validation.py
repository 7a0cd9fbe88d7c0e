"""``thermorc calibrate --test-days`` (held-out validation) and ``--estimator``."""

import json
import sys
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from thermorc.cli import app
from thermorc.write import write_csv

sys.path.insert(0, str(Path(__file__).parent))
from test_estimate import stochastic_log  # noqa: E402

runner = CliRunner()


@pytest.fixture(scope="module")
def log_csv(tmp_path_factory):
    # 21 days of 15-minute data from a known 2R2C with 0.05 K measurement noise and a little
    # process noise (tests/test_estimate.py).
    log, _, _ = stochastic_log(seed=21, days=21)
    path = tmp_path_factory.mktemp("validation") / "log.csv"
    write_csv(path, log.rename_axis("time"), float_format="%.10g")
    return path


def test_the_last_days_are_kept_back_and_predicted(log_csv, tmp_path):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--test-days", "7", "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "validation" in r.stdout and "not fitted" in r.stdout
    body = json.loads(out.read_text(encoding="utf-8"))
    val = body["validation"]
    # Fitted on the first 14 days only, the 7 x 96 rows after them predicted.
    assert body["fit"]["n_samples"] == 14 * 96
    assert val["n_samples"] == 7 * 96
    assert val["initial_state"] == "continued from the end of the calibration data"
    # The data come from a known 2R2C (simulate-and-fit): its prediction of a week it did not
    # see errs by the 0.05 K reading noise plus the drift its process noise adds over a week.
    # 0.2 K is our margin over that (common practice, no source).
    assert 0.04 < val["rmse_k"] < 0.2
    assert abs(val["bias_k"]) < 0.15
    # Guideline 14 energy figures of the week, hourly, as in the fit's own.
    assert np.isfinite(val["cv_rmse_pct"]) and val["energy"]["hourly"]["n"] > 100


@pytest.mark.parametrize("days, words", [("0", "positive"), ("21", "leaves nothing to calibrate on"),
                                         ("-3", "positive"), ("nan", "positive"), ("inf", "positive"),
                                         ("0.0001", "fewer than two rows")])
def test_a_test_period_that_leaves_no_fit_is_refused(log_csv, tmp_path, days, words):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--test-days", days, "--out", str(out)])
    assert r.exit_code == 2
    errors = [line for line in r.stderr.splitlines() if line.startswith("thermorc: error:")]
    assert len(errors) == 1 and words in errors[0]
    assert "Traceback" not in r.output
    assert not out.exists()


def test_the_prediction_error_estimator_is_chosen_from_the_command_line(log_csv, tmp_path):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--estimator", "prediction-error",
                            "--out", str(out)])
    assert r.exit_code == 0, r.output
    body = json.loads(out.read_text(encoding="utf-8"))
    assert body["estimator"]["method"] == "prediction_error"
    assert body["estimator"]["noise"]["measurement_noise_k"] == pytest.approx(0.05, rel=0.3)


def test_four_period_gains_from_the_command_line(log_csv, tmp_path):
    # The option reaches the fit and RESULT.json keeps what rebuilds the gains; simulate reads
    # the file back. (The levels themselves are checked in tests/test_estimate.py.)
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--gains", "four-period", "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "unlogged gains, evening" in r.stdout
    body = json.loads(out.read_text(encoding="utf-8"))
    assert body["gains_schedule"]["kind"] == "four_period" and body["gains_schedule"]["starts_h"] == [6, 9, 17, 23]
    assert {f"internal_gains_{k}_w" for k in ("morning", "daytime", "evening", "night")} <= set(body["parameters"])
    sim = tmp_path / "SIM.csv"
    r = runner.invoke(app, ["simulate", str(out), "--log", str(log_csv), "--out", str(sim)])
    assert r.exit_code == 0, r.output
    assert sim.exists()


def test_the_households_own_gains_hours_from_the_command_line(log_csv, tmp_path):
    # --gains-hours sets the periods' starts (here a night period after midnight); they are
    # kept in RESULT.json, so simulate rebuilds the household's own day.
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--gains", "four-period",
                            "--gains-hours", "9,12,20,2", "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "(20-02 h)" in r.stdout and "(02-09 h)" in r.stdout  # the summary says each period's hours
    body = json.loads(out.read_text(encoding="utf-8"))
    assert body["gains_schedule"]["starts_h"] == [9, 12, 20, 2]
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--gains", "day-night",
                            "--gains-hours", "8,22.5", "--out", str(out)])
    assert r.exit_code == 0, r.output
    assert "(08-22:30 h)" in r.stdout and "(22:30-08 h)" in r.stdout
    body = json.loads(out.read_text(encoding="utf-8"))
    assert (body["gains_schedule"]["day_start_h"], body["gains_schedule"]["night_start_h"]) == (8, 22.5)
    sim = tmp_path / "SIM.csv"
    assert runner.invoke(app, ["simulate", str(out), "--log", str(log_csv), "--out", str(sim)]).exit_code == 0


@pytest.mark.parametrize("gains, hours, words", [
    ("four-period", "9,12,20", "4 start hours"),
    ("four-period", "9,20,12,2", "order of the day"),
    ("four-period", "6,9,17,24", "order of the day"),
    ("four-period", "six,9,17,23", "separated by commas"),
    ("day-night", "7", "2 start hours"),
    ("constant", "7,23", "one constant level has no hours"),
])
def test_gains_hours_that_do_not_fit_the_periods_are_refused(log_csv, tmp_path, gains, hours, words):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(log_csv), "--model", "2R2C", "--gains", gains, "--gains-hours", hours,
                            "--out", str(out)])
    assert r.exit_code == 2
    errors = [line for line in r.stderr.splitlines() if line.startswith("thermorc: error:")]
    assert len(errors) == 1 and words in errors[0] and "--gains-hours" in errors[0]
    assert "Traceback" not in r.output
    assert not out.exists()
