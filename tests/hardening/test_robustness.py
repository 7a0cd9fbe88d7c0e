"""
Numerical robustness and reproducibility: stiff networks against scipy.signal.lsim, extreme
capacitances and resistances, near-singular calibration data, and bit-identical result files
that record the version and the inputs' hashes.
"""

from __future__ import annotations

import hashlib
import json
import warnings

import numpy as np
import pandas as pd
import pytest
import scipy.signal

from tests.hardening.conftest import runner
from tests.hardening.test_properties import simulated_log
from thermorc import __version__, estimate
from thermorc.cli import app
from thermorc.errors import InputError
from thermorc.network import Network
from thermorc.simulate import simulate


def stiff_chain(capacitances_j_per_k, conductances_w_per_k):
    """A chain outdoor - n0 - n1 - ... with heat into n0 (time constants set by C / G)."""
    net = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    for i, c in enumerate(capacitances_j_per_k):
        net.add_node(f"n{i}", c)
    net.add_conductance("n0", "outdoor_c", conductances_w_per_k[0])
    for i in range(1, len(capacitances_j_per_k)):
        net.add_conductance(f"n{i - 1}", f"n{i}", conductances_w_per_k[i])
    net.add_heat_input("heating_w", "n0")
    return net


STIFF = {
    # Time constants from about a minute to a few weeks (C / G: 6e3 / 100 = 60 s; 2e9 / 1e3 ~ 23 d).
    "minutes_to_weeks": ([6e3, 5e6, 2e9], [100.0, 300.0, 1e3]),
    "seconds_to_months": ([50.0, 1e7, 1e10], [400.0, 50.0, 2e3]),
    "huge_capacitance": ([1e12, 1e7], [200.0, 500.0]),
    "tiny_resistances": ([1e6, 1e7, 3e7], [1e6, 1e6, 1e6]),  # 1e-6 K/W each
}


@pytest.mark.parametrize("case", sorted(STIFF))
def test_stiff_networks_match_scipy_lsim(case):
    # scipy.signal.lsim with interp=True holds every input linearly between samples (scipy
    # docs); our boundaries use the same first-order hold, and a constant heat input makes
    # the zero-order hold of heat identical to it.
    caps, gs = STIFF[case]
    net = stiff_chain(caps, gs)
    tau = net.time_constants_s()
    assert np.all(np.isfinite(tau)) and tau.min() > 0
    n, dt = 2000, 300.0
    index = pd.date_range("2025-01-01", periods=n, freq=pd.Timedelta(seconds=dt), tz="UTC")
    t = np.arange(n) * dt
    outdoor = 5 + 8 * np.sin(2 * np.pi * t / 86400) + 3 * np.sin(2 * np.pi * t / (7 * 86400))
    inputs = pd.DataFrame({"outdoor_c": outdoor, "heating_w": 2000.0}, index=index)
    x0 = np.linspace(15, 5, len(caps))
    res = simulate(net, inputs, x0=x0, boundary_hold="foh")
    ours = res.temperatures_c[list(net.state_space().states)].to_numpy()
    assert np.isfinite(ours).all() and np.isfinite(res.mean_temperatures_c.to_numpy()).all()
    space = net.state_space()
    ref_sys = scipy.signal.StateSpace(space.a, space.b, np.eye(len(caps)), np.zeros_like(space.b))
    _, _, ref = scipy.signal.lsim(ref_sys, inputs.to_numpy(), t, X0=x0, interp=True)
    # lsim integrates the same exact solution through a matrix exponential of the augmented
    # system; on stiff systems both lose digits in proportion to the temperature scale.
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-6 * (1 + np.abs(ref).max()))


@pytest.mark.parametrize("case", sorted(STIFF))
def test_extreme_networks_reach_the_exact_steady_state(case):
    # Constant inputs for many slow time constants: every node must reach the steady state
    # T = T_out + Q / G_0 at n0 (series chain, only n0 touches outdoor; Ohm's-law analogy).
    caps, gs = STIFF[case]
    net = stiff_chain(caps, gs)
    tau_max = net.time_constants_s().max()
    n = 400
    # A plain array with a step: the slowest case spans millennia, beyond pandas' dates.
    inputs = np.column_stack([np.full(n, -5.0), np.full(n, 1500.0)])
    res = simulate(net, inputs, x0=np.zeros(len(caps)), dt_s=tau_max / 10)
    final = res.temperatures_c.iloc[-1].to_numpy()
    assert np.isfinite(res.temperatures_c.to_numpy()).all()
    np.testing.assert_allclose(final, -5.0 + 1500.0 / gs[0], rtol=1e-9, atol=1e-9)


def test_massless_node_between_tiny_resistances_is_finite():
    net = Network(boundaries=("outdoor_c",), inputs=("heating_w",))
    net.add_node("indoor", 1e12).add_node("skin", 0.0)
    net.add_resistance("indoor", "skin", 1e-6).add_resistance("skin", "outdoor_c", 1e-6)
    net.add_heat_input("heating_w", "indoor")
    index = pd.date_range("2025-01-01", periods=100, freq="h", tz="UTC")
    res = simulate(net, pd.DataFrame({"outdoor_c": 0.0, "heating_w": 1e3}, index=index), x0=[20.0])
    assert np.isfinite(res.temperatures_c.to_numpy()).all()
    # Voltage divider: the skin sits half way between indoor and outdoor.
    np.testing.assert_allclose(res.temperatures_c["skin"], 0.5 * res.temperatures_c["indoor"], rtol=1e-9)


# ------------------------------------------------------------------------------------------
# The estimator on data that cannot pin the model down
# ------------------------------------------------------------------------------------------

def _near_singular_logs():
    index = pd.date_range("2025-01-01", periods=14 * 48, freq="30min", tz="UTC")
    n = len(index)
    rng = np.random.default_rng(0)
    h = np.arange(n) * 0.5
    outdoor = 2 + 8 * np.sin(2 * np.pi * (h - 15) / 24)
    net = Network.from_preset("1R1C", r_indoor_outdoor_k_per_w=0.005, c_indoor_j_per_k=2e7)
    inputs = pd.DataFrame({"outdoor_c": outdoor, "heating_w": 3000.0, "solar_w_m2": 0.0, "internal_w": 0.0},
                          index=index)[list(net.inputs)]
    swinging = simulate(net, inputs).temperatures_c["indoor"].to_numpy() + rng.normal(0, 0.02, n)
    return {
        "constant_everything": pd.DataFrame({"indoor_c": 20.0, "heating_w": 1000.0, "outdoor_c": 5.0,
                                             "ghi_w_m2": 0.0}, index=index),
        "constant_indoor": pd.DataFrame({"indoor_c": 20.0 + rng.normal(0, 0.01, n), "heating_w": rng.uniform(0, 3e3, n),
                                         "outdoor_c": outdoor, "ghi_w_m2": 0.0}, index=index),
        # Indoor swings with the weather but the heating never changes: heat loss and unlogged
        # gains are confounded (only their ratio is in the data).
        "constant_heating": pd.DataFrame({"indoor_c": swinging, "heating_w": 3000.0, "outdoor_c": outdoor,
                                          "ghi_w_m2": 0.0}, index=index),
    }


@pytest.mark.parametrize("case", ["constant_everything", "constant_indoor", "constant_heating"])
@pytest.mark.parametrize("model", ["1R1C", "2R2C"])
def test_near_singular_data_is_refused_or_flagged(case, model):
    log = _near_singular_logs()[case]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = estimate.calibrate(estimate.calibration_data(log), model=model)
    except InputError as exc:
        assert exc.column in ("indoor_c", "heating_w", "outdoor_c", None)
        return
    # Not refused: then the result must say it is doubtful, never look confident.
    lo, hi = result.intervals["heat_loss_coefficient_w_per_k"]
    assert result.warnings or not np.isfinite(hi - lo) or (hi - lo) > 0.5 * result.heat_loss_coefficient_w_per_k


# ------------------------------------------------------------------------------------------
# Reproducibility and provenance of RESULT.json
# ------------------------------------------------------------------------------------------

#: Keys whose values measure the run, not the result (wall time).
TIMING_KEYS = {"seconds", "elapsed_s", "wall_time_s", "fit_seconds", "timing"}


def _without_timing(obj):
    if isinstance(obj, dict):
        return {k: _without_timing(v) for k, v in obj.items() if k not in TIMING_KEYS}
    if isinstance(obj, list):
        return [_without_timing(v) for v in obj]
    return obj


@pytest.fixture(scope="module")
def simulated_log_csv(tmp_path_factory):
    from thermorc.write import write_csv

    log, _ = simulated_log(11)
    path = tmp_path_factory.mktemp("repro") / "log.csv"
    write_csv(path, log.rename_axis("time"), float_format="%.10g")
    return path


def test_calibrate_twice_gives_bit_identical_results(tmp_path, simulated_log_csv):
    outs = []
    for k in range(2):
        out = tmp_path / f"RESULT{k}.json"
        r = runner.invoke(app, ["calibrate", str(simulated_log_csv), "--model", "2R2C", "--out", str(out), "--quiet"])
        assert r.exit_code == 0, r.output
        outs.append(json.loads(out.read_text(encoding="utf-8")))
    assert _without_timing(outs[0]) == _without_timing(outs[1])
    text = [json.dumps(_without_timing(o), sort_keys=True) for o in outs]
    assert text[0] == text[1]


def test_result_records_version_and_input_hashes(tmp_path, simulated_log_csv):
    out = tmp_path / "RESULT.json"
    r = runner.invoke(app, ["calibrate", str(simulated_log_csv), "--model", "1R1C", "--out", str(out), "--quiet"])
    assert r.exit_code == 0, r.output
    body = json.loads(out.read_text(encoding="utf-8"))
    prov = body["provenance"]
    assert prov["thermorc_version"] == __version__
    # SHA-256 of the file's bytes (FIPS 180-4), computed here independently.
    assert prov["inputs"]["log"]["sha256"] == hashlib.sha256(simulated_log_csv.read_bytes()).hexdigest()
    assert prov["inputs"]["log"]["file"] == simulated_log_csv.name


# ------------------------------------------------------------------------------------------
# Interrupted writes leave the old file and no temporary file
# ------------------------------------------------------------------------------------------

@pytest.mark.parametrize("error", [RuntimeError, KeyboardInterrupt])
def test_an_interrupted_write_leaves_the_old_file(tmp_path, monkeypatch, error):
    from thermorc.write import atomic_write, write_json

    target = tmp_path / "out.json"
    target.write_bytes(b"old contents\n")
    with pytest.raises(error):
        with atomic_write(target) as handle:
            handle.write("half of a new file")
            raise error()
    assert target.read_bytes() == b"old contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]

    def exploding_fsync(fd):  # the disk fails at the last moment, after every byte was written
        raise error()

    monkeypatch.setattr("os.fsync", exploding_fsync)
    with pytest.raises(error):
        write_json(target, {"a": 1.0})
    assert target.read_bytes() == b"old contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_log_across_new_year_with_a_dated_weather_csv_without_site(tmp_path):
    # Measured weather keeps its own dates (only typical years are moved to the log's year),
    # and a weather CSV need not name its site.
    from thermorc.chain import prepare_log

    hours = pd.date_range("2024-12-20", "2025-01-20", freq="h", tz="UTC")
    pd.DataFrame({"time": [t.isoformat() for t in hours], "outdoor_c": np.arange(len(hours)) % 7 - 3.0,
                  "ghi_w_m2": 0.0}).to_csv(tmp_path / "weather.csv", index=False)
    stamps = pd.date_range("2024-12-21", "2025-01-19", freq="15min", tz="UTC")
    rng = np.random.default_rng(0)
    pd.DataFrame({"time": [t.isoformat() for t in stamps], "indoor_c": 20 + rng.normal(0, 0.5, len(stamps)),
                  "heating_w": rng.uniform(0, 3000, len(stamps))}).to_csv(tmp_path / "log.csv", index=False)
    prepared = prepare_log(tmp_path / "log.csv", weather_path=tmp_path / "weather.csv")
    frame = prepared.data
    assert frame["outdoor_c"].notna().all()
    # Linear interpolation of the hourly readings at the log's stamps, e.g. 2025-01-05 12:15.
    t = pd.Timestamp("2025-01-05T12:15Z")
    k = hours.get_loc(t.floor("h"))
    expected = (k % 7 - 3.0) + 0.25 * (((k + 1) % 7 - 3.0) - (k % 7 - 3.0))
    assert frame.loc[t, "outdoor_c"] == pytest.approx(expected)
