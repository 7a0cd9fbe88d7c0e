"""Speed goal: read, clean and resample one year of 1-minute data (525,600 rows, 6 columns).

Goal: under 3 s and under 1 GiB peak memory. The run happens in a fresh Python process so
the peak resident set size (resource.getrusage, ru_maxrss in KiB on Linux) belongs to it alone.
"""

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

CHILD = r"""
import json, resource, sys, time
from thermorc.read import read_log
from thermorc.align import align
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t0 = time.perf_counter()
data, meta = read_log(sys.argv[1], tz="America/New_York")
t1 = time.perf_counter()
aligned = align(data, 900)
t2 = time.perf_counter()
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"read_s": t1 - t0, "align_s": t2 - t1, "total_s": t2 - t0, "peak_mib": peak / 1024,
                  "import_mib": base / 1024, "rows": meta["rows"], "grid_rows": len(aligned.data)}))
"""


@pytest.mark.benchmark
def test_one_year_of_minute_data(tmp_path):
    n = 525_600
    idx = pd.date_range("2023-01-01", periods=n, freq="min", tz="America/New_York")
    t_h = np.arange(n) / 60.0
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({
        "time": idx.strftime("%Y-%m-%dT%H:%M:%S%z"),
        "indoor_c": (20 + 0.5 * np.sin(2 * np.pi * t_h / 24) + rng.normal(0, 0.05, n)).round(2),
        "heating_w": np.where((t_h % 1) < 0.3, 12000.0, 0.0),
        "outdoor_c": (5 + 8 * np.sin(2 * np.pi * t_h / 24)).round(2),
        "ghi_w_m2": np.clip(800 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None).round(1),
        "setpoint_c": 20.0,
    })
    path = tmp_path / "year.csv"
    frame.to_csv(path, index=False)
    del frame
    proc = subprocess.run([sys.executable, "-c", CHILD, str(path)], capture_output=True, text=True, check=True)
    figures = json.loads(proc.stdout)
    print(f"\nread {figures['read_s']:.2f} s + align {figures['align_s']:.2f} s = {figures['total_s']:.2f} s; "
          f"peak RSS {figures['peak_mib']:.0f} MiB (after imports {figures['import_mib']:.0f} MiB); "
          f"{figures['rows']} rows -> {figures['grid_rows']} grid rows")
    assert figures["rows"] == n
    assert figures["total_s"] < 3.0
    assert figures["peak_mib"] < 1024.0
