"""``thermorc simulate`` on the weeks after a calibration, in files of their own."""

import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from typer.testing import CliRunner

from thermorc import estimate
from thermorc.cli import app
from thermorc.errors import ThermorcWarning
from thermorc.write import write_csv, write_json

sys.path.insert(0, str(Path(__file__).parent))
from test_estimate import stochastic_log  # noqa: E402

runner = CliRunner()
CUT = 14 * 96  # 14 days of 15-minute rows calibrate; the next 7 are predicted


def _csv(frame, path):
    write_csv(path, frame.rename_axis("time"), float_format="%.10g")
    return path


def test_the_next_week_in_its_own_file_predicts_as_one_run_does(tmp_path):
    # A 2R2C log with noise (tests/test_estimate.py): calibrated on two weeks, the third week
    # simulated from a file of its own must match the prediction over all three weeks in one
    # run, the envelope carried on from the calibration's end (RESULT.json end_state).
    log, _, _ = stochastic_log(seed=8, days=21)
    fit_csv, next_csv = _csv(log.iloc[:CUT], tmp_path / "fit.csv"), _csv(log.iloc[CUT:], tmp_path / "next.csv")
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(fit_csv), "--model", "2R2C", "--out", str(out)])
    assert r.exit_code == 0, r.output
    # The log has irradiance but no site: the weaker horizontal input, and the user is told.
    assert "the site is not known" in r.stderr
    sim = tmp_path / "SIM.csv"
    r = runner.invoke(app, ["simulate", str(out), "--log", str(next_csv), "--out", str(sim)])
    assert r.exit_code == 0, r.output
    assert "continued from the end of the calibration data" in r.stdout
    separate = pd.read_csv(sim)["indoor_c"].to_numpy()

    from thermorc.result import CalibrationResult

    whole = estimate.predict(CalibrationResult.from_json(out), log)["indoor_c"].to_numpy()[CUT:]
    assert np.max(np.abs(separate - whole)) < 0.05


def test_simulate_reads_powers_stamped_at_the_end_of_their_interval(tmp_path):
    # --interval end on simulate relabels the interval means as calibrate does: the same two
    # weeks written both ways give the same prediction.
    log, _, _ = stochastic_log(seed=9, days=14)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ThermorcWarning)
        res = estimate.calibrate(log, model="2R2C", energy_metrics=False)
    res.extras.pop("end_state")
    out = tmp_path / "RESULT.json"
    write_json(out, res.to_dict())
    start_csv = _csv(log.iloc[1:], tmp_path / "start.csv")
    # Interval means (heating and irradiance) stamped at the end of their interval.
    end = log.assign(heating_w=log["heating_w"].shift(1), ghi_w_m2=log["ghi_w_m2"].shift(1))
    end_csv = _csv(end.iloc[1:], tmp_path / "end.csv")
    sims = []
    for path, extra in ((start_csv, []), (end_csv, ["--interval", "end"])):
        sim = tmp_path / f"sim_{path.stem}.csv"
        r = runner.invoke(app, ["simulate", str(out), "--log", str(path), "--out", str(sim), *extra])
        assert r.exit_code == 0, r.output
        sims.append(pd.read_csv(sim, index_col="time")["indoor_c"])
    # The end-labelled file has no power for its last interval.
    a, b = sims[0].iloc[:-1], sims[1].iloc[:-1]
    assert list(a.index) == list(b.index)
    assert np.max(np.abs(a.to_numpy() - b.to_numpy())) < 1e-3
