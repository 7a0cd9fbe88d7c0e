"""Speed and memory goal: one year of 1-minute data (525,600 rows) through calibrate and report.

Goal: each command under 2 GiB peak memory. Each runs in a fresh Python process so the peak
resident set size (resource.getrusage, ru_maxrss in KiB on Linux) is its own; the figures
are printed (run with `make bench`, which passes -s).
"""

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

GIB = 1024**3

CHILD = r"""
import json, resource, sys, time
from thermorc.cli import app
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t0 = time.perf_counter()
try:
    app(sys.argv[1:], standalone_mode=False)
    code = 0
except SystemExit as exc:
    code = exc.code
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print("BENCH " + json.dumps({"seconds": time.perf_counter() - t0, "peak_mib": peak / 1024,
                             "import_mib": base / 1024, "code": code}))
"""


def one_year_log(path):
    """A year of 1-minute data from a 2R2C (invented home) under an on/off thermostat."""
    from thermorc.network import Network
    from thermorc.simulate import discretise

    n, dt = 525_600, 60.0
    rng = np.random.default_rng(2026)
    net = Network.from_preset("2R2C", dict(r_indoor_envelope_k_per_w=0.0008, r_envelope_outdoor_k_per_w=0.0042,
                                           c_indoor_j_per_k=4e6, c_envelope_j_per_k=2.5e7, solar_aperture_m2=3.0))
    space = net.state_space()
    ad, bd, _ = discretise(space.a, space.b, dt, "zoh")
    t_h = np.arange(n) / 60.0
    day = t_h / 24
    outdoor = 8 - 10 * np.cos(2 * np.pi * (day - 20) / 365) + 5 * np.sin(2 * np.pi * (t_h - 15) / 24) + np.repeat(
        rng.normal(0, 3, n // 1440 + 1), 1440)[:n]
    ghi = np.clip(700 * np.sin(2 * np.pi * (t_h % 24 - 6) / 24), 0, None) * np.repeat(rng.uniform(0.2, 1, 366), 1440)[:n]
    setpoint = np.where((t_h % 24 >= 6.5) & (t_h % 24 < 23), 20.5, 17.0)
    # Inputs in the network's order: outdoor, heating, solar, internal gains.
    x = np.array([19.0, 12.0])
    indoor, heat = np.empty(n), np.empty(n)
    on = False
    for k in range(n):
        indoor[k] = x[0]
        on = x[0] < setpoint[k] - 0.3 or (on and x[0] < setpoint[k] + 0.3)
        heat[k] = 9000.0 if on else 0.0
        x = ad @ x + bd @ np.array([outdoor[k], heat[k], ghi[k], 350.0])
    index = pd.date_range("2025-01-01", periods=n, freq="min", tz="UTC")
    frame = pd.DataFrame({
        "time": index.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "indoor_c": (indoor + rng.normal(0, 0.05, n)).round(2),
        "heating_w": heat,
        "outdoor_c": outdoor.round(2),
        "ghi_w_m2": ghi.round(1),
    })
    frame.to_csv(path, index=False)


def _run(args):
    proc = subprocess.run([sys.executable, "-c", CHILD, *args], capture_output=True, text=True, timeout=3600)
    line = next((l for l in proc.stdout.splitlines() if l.startswith("BENCH ")), None)
    assert line is not None, proc.stdout[-2000:] + proc.stderr[-2000:]
    found = json.loads(line[6:])
    assert found["code"] in (0, None), proc.stdout[-2000:] + proc.stderr[-2000:]
    return found


@pytest.mark.benchmark
def test_one_year_of_minute_data_through_calibrate_and_report(tmp_path):
    log = tmp_path / "log.csv"
    one_year_log(log)
    result = tmp_path / "RESULT.json"
    cal = _run(["calibrate", str(log), "--model", "2R2C", "--out", str(result), "--quiet"])
    print(f"\ncalibrate, 525,600 rows: {cal['seconds']:.1f} s, peak RSS {cal['peak_mib']:.0f} MiB "
          f"(after imports {cal['import_mib']:.0f} MiB)")
    assert cal["peak_mib"] * 1024**2 < 2 * GIB
    body = json.loads(result.read_text())
    assert body["provenance"]["inputs"]["log"]["file"] == "log.csv"
    home = tmp_path / "home.toml"
    home.write_text('name = "Benchmark home (invented)"\n[log]\nfile = "log.csv"\n[model]\npreset = "2R2C"\n'
                    'result = "RESULT.json"\n', encoding="utf-8")
    rep = _run(["report", str(home), "--month", "2025-02", "--out", str(tmp_path / "report"), "--quiet"])
    print(f"report, 525,600 rows: {rep['seconds']:.1f} s, peak RSS {rep['peak_mib']:.0f} MiB")
    assert rep["peak_mib"] * 1024**2 < 2 * GIB
    assert (tmp_path / "report" / "report-2025-02.html").is_file()
