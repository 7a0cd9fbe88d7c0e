"""Fleet speed goal: 1,000 invented homes, a month of 15-minute data each, --model auto, 2 cores.

Goal of the fleet command: at least 25 homes per second on 2 cores and a peak
memory (the runner and its workers together) under 2 GiB. The homes are the invented 2R2C
homes of tests/test_fleet.py, written to one hive-partitioned Parquet dataset as fleets are
usually stored. Run with `make bench`; THERMORC_BENCH_HOMES sets a smaller fleet.
"""

import cProfile
import io
import os
import pstats
import threading
import time

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.dataset as ds
import pytest

from test_fleet import SITE, simulate_log
from thermorc.fleet import HomeSpec, calibrate_home, run_fleet

pytestmark = pytest.mark.benchmark

N_HOMES = int(os.environ.get("THERMORC_BENCH_HOMES", "1000"))
TARGET_HOMES_PER_S = 25.0
TARGET_PEAK_BYTES = 2 * 1024**3
N_DISTINCT = 50  # simulated homes; the others repeat them with fresh sensor noise


def _write_fleet(root, n_homes):
    """A hive-partitioned dataset of ``n_homes`` logs and a manifest listing them."""
    rng = np.random.default_rng(7)
    base = [simulate_log(seed, days=30) for seed in range(min(N_DISTINCT, n_homes))]
    tables = []
    lines = ["id,log,partition,site,floor_area_m2"]
    for i in range(n_homes):
        log, _ = base[i % len(base)]
        frame = log.reset_index()
        frame["indoor_c"] = np.round(frame["indoor_c"] + rng.normal(0, 0.05, len(frame)), 1)
        frame["home_id"] = f"h{i:05d}"
        tables.append(pa.Table.from_pandas(frame, preserve_index=False))
        lines.append(f"h{i:05d},logs,home_id=h{i:05d},\"{SITE}\",{rng.uniform(60, 250):.0f}")
        if len(tables) == 100:
            ds.write_dataset(pa.concat_tables(tables), root / "logs", format="parquet", partitioning=["home_id"],
                             partitioning_flavor="hive", existing_data_behavior="overwrite_or_ignore",
                             basename_template=f"part-{i}-{{i}}.parquet")
            tables = []
    if tables:
        ds.write_dataset(pa.concat_tables(tables), root / "logs", format="parquet", partitioning=["home_id"],
                         partitioning_flavor="hive", existing_data_behavior="overwrite_or_ignore",
                         basename_template="part-last-{i}.parquet")
    (root / "homes.csv").write_text("\n".join(lines) + "\n")


class _PeakRss:
    """Largest sum of resident set sizes of this process and its children, and their CPU time, sampled."""

    def __init__(self, every_s=0.1):
        import psutil

        self.me = psutil.Process()
        self.every_s = every_s
        self.peak = 0
        self.cpu_s = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self):
        import psutil

        while not self._stop.is_set():
            total = 0
            for proc in [self.me, *self.me.children(recursive=True)]:
                try:
                    total += proc.memory_info().rss
                    if proc.pid != self.me.pid:
                        times = proc.cpu_times()
                        self.cpu_s[proc.pid] = times.user + times.system
                except psutil.Error:
                    pass
            self.peak = max(self.peak, total)
            self._stop.wait(self.every_s)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


def test_fleet_rate_and_memory(tmp_path):
    t0 = time.perf_counter()
    _write_fleet(tmp_path, N_HOMES)
    print(f"\nfleet of {N_HOMES} homes written in {time.perf_counter() - t0:.1f} s")

    # Where the time of one home goes (a warm process: the first call compiles and imports).
    home = HomeSpec(home_id="h00001", log=str(tmp_path / "logs"), partition={"home_id": "h00001"}, site=SITE)
    calibrate_home(home)
    profile = cProfile.Profile()
    t1 = time.perf_counter()
    profile.enable()
    row = calibrate_home(home)
    profile.disable()
    one = time.perf_counter() - t1
    assert row["status"] == "ok", row["error"]
    text = io.StringIO()
    stats = pstats.Stats(profile, stream=text)
    stats.sort_stats("cumulative").print_stats(r"thermorc|least_squares|read_parquet|to_parquet", 18)
    print(f"one home, one core: {one:.3f} s")
    print(text.getvalue()[-4000:])

    out = tmp_path / "RESULTS.parquet"
    with _PeakRss() as rss:
        t2 = time.perf_counter()
        run = run_fleet(tmp_path / "homes.csv", out, workers=2, model="auto")
        wall = time.perf_counter() - t2
    # CPU seconds of the worker processes (children of the pool's server, so sampled): the rate
    # two idle cores would give, whatever else the machine was running.
    cpu_s = max(sum(rss.cpu_s.values()), 1e-9)
    rate = run.n_run / wall
    frame = pd.read_parquet(out)
    print(f"{run.n_run} homes in {wall:.1f} s on 2 workers: {rate:.2f} homes/s (goal {TARGET_HOMES_PER_S:g}); "
          f"worker CPU {cpu_s:.0f} s = {run.n_run / (cpu_s / 2):.2f} homes/s on 2 idle cores; "
          f"peak RSS {rss.peak / 1024**2:.0f} MiB (goal < {TARGET_PEAK_BYTES / 1024**2:.0f} MiB); "
          f"errors {run.n_errors}; models {frame['model'].value_counts().to_dict()}; load average "
          f"{os.getloadavg()[1]:.1f}")
    print("errors:", frame["error"].value_counts().to_dict())
    misses = []
    if run.n_errors:
        misses.append(f"{run.n_errors} homes failed")
    if rss.peak >= TARGET_PEAK_BYTES:
        misses.append(f"peak RSS {rss.peak / 1024**2:.0f} MiB")
    if rate < TARGET_HOMES_PER_S:
        misses.append(f"rate {rate:.2f} homes/s is {TARGET_HOMES_PER_S / rate:.1f} x short of the goal")
    assert not misses, "; ".join(misses)
