"""Fleets: manifests, per-home isolation, resume, the summary, and a Dask cluster against the local pool.

The homes are invented: 2R2C presets (thermorc.network) driven by an ideal heater holding a
setback schedule (thermorc.simulate.hold_setpoint) under smooth invented weather, with
sensor noise and 0.1 degC rounding. Their true UA is the series sum of the two resistances,
UA = 1 / (R_ie + R_eo) (the steady state of resistances in series; any heat-transfer
textbook, e.g. Incropera et al., Fundamentals of Heat and Mass Transfer, 7th ed., sec. 3.1).
"""

import dataclasses
import hashlib
import json
import math
import os
import shutil
import socket
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest
from typer.testing import CliRunner

from thermorc.chain import calibrate_files
from thermorc.cli import app
from thermorc.errors import InputError
from thermorc.fleet import (
    RESULT_COLUMNS,
    calibrate_home,
    flatten_result,
    input_fingerprint,
    journal_path,
    lock_path,
    read_manifest,
    run_fleet,
    summary_path,
)
from thermorc.network import Network
from thermorc.simulate import hold_setpoint

runner = CliRunner()
SITE = "45,-90"
DAYS = 10
STEP_S = 900.0


def simulate_log(seed, days=DAYS, step_s=STEP_S, start="2024-01-08"):
    """An invented home's log (canonical columns on a tz-aware index) and its true UA [W/K]."""
    rng = np.random.default_rng(seed)
    ua = rng.uniform(120, 300)
    c_total = rng.uniform(1.5e7, 4e7)
    share = rng.uniform(0.1, 0.3)
    r_eo = 1 / ua * rng.uniform(0.8, 0.9)
    r_ie = 1 / ua - r_eo
    net = Network.from_preset(
        "2R2C", r_indoor_envelope_k_per_w=r_ie, r_envelope_outdoor_k_per_w=r_eo, c_indoor_j_per_k=c_total * share,
        c_envelope_j_per_k=c_total * (1 - share), solar_aperture_m2=rng.uniform(1, 4),
    )
    n = int(days * 86400 / step_s)
    index = pd.date_range(start, periods=n, freq=pd.Timedelta(seconds=step_s), tz="America/Chicago", name="time")
    t_h = np.arange(n) * step_s / 3600
    outdoor = rng.uniform(-6, 4) + 5 * np.sin(2 * np.pi * (t_h - 15) / 24) + np.cumsum(rng.normal(0, 0.08, n))
    ghi = np.clip(450 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None) * rng.uniform(0.4, 1.0)
    inputs = pd.DataFrame({"outdoor_c": outdoor, "heating_w": 0.0, "solar_w_m2": ghi, "internal_w": 250.0}, index=index)
    setpoint = np.where((index.hour >= 6) & (index.hour < 22), 21.0, 16.0)
    run = hold_setpoint(net, inputs, setpoint, capacity_w=ua * 45)
    log = pd.DataFrame({
        "indoor_c": np.round(run.temperatures_c["indoor"].to_numpy() + rng.normal(0, 0.07, n), 1),
        "heating_w": np.round(run.inputs["heating_w"].to_numpy(), 0),
        "outdoor_c": np.round(outdoor, 1),
        "ghi_w_m2": np.round(ghi, 0),
    }, index=index)
    return log, 1 / (r_ie + r_eo)


def write_csv_log(log, path):
    """The canonical CSV log: ISO 8601 times with their UTC offset (docs/data-formats.md)."""
    out = log.copy()
    out.index = pd.Index([t.isoformat() for t in out.index], name="time")
    out.to_csv(path)


@pytest.fixture(scope="module")
def fleet_dir(tmp_path_factory):
    """Four good homes (three CSV logs, one in a hive-partitioned Parquet dataset) and one bad one."""
    root = tmp_path_factory.mktemp("fleet")
    (root / "logs").mkdir()
    truth = {}
    for i in range(1, 4):
        log, truth[f"h{i}"] = simulate_log(i)
        write_csv_log(log, root / "logs" / f"h{i}.csv")
    # h4 lives in a dataset partitioned by home_id, as fleets are usually stored.
    log4, truth["h4"] = simulate_log(4)
    frame = log4.reset_index()
    frame["home_id"] = "h4"
    other, _ = simulate_log(9)
    other = other.reset_index()
    other["home_id"] = "x9"
    table = pd.concat([frame, other], ignore_index=True)
    import pyarrow as pa

    ds.write_dataset(pa.Table.from_pandas(table, preserve_index=False), root / "dataset", format="parquet",
                     partitioning=["home_id"], partitioning_flavor="hive")
    # The bad home: a cell that is not a number, on line 40 of the file as an editor counts.
    bad, _ = simulate_log(5)
    write_csv_log(bad, root / "logs" / "bad.csv")
    lines = (root / "logs" / "bad.csv").read_text().splitlines()
    cells = lines[39].split(",")
    cells[1] = "n/a?"
    lines[39] = ",".join(cells)
    (root / "logs" / "bad.csv").write_text("\n".join(lines) + "\n")
    (root / "homes.csv").write_text(
        "id,log,partition,site,floor_area_m2\n"
        f"h1,logs/h1.csv,,\"{SITE}\",120\n"
        f"h2,logs/h2.csv,,\"{SITE}\",95.5\n"
        f"bad,logs/bad.csv,,\"{SITE}\",100\n"
        f"h3,logs/h3.csv,,\"{SITE}\",\n"
        f"h4,dataset,home_id=h4,\"{SITE}\",150\n"
    )
    return root, truth


@pytest.fixture(scope="module")
def local_run(fleet_dir, tmp_path_factory):
    root, _ = fleet_dir
    out = tmp_path_factory.mktemp("out") / "RESULTS.parquet"
    run = run_fleet(root / "homes.csv", out, workers=2, model="2R2C", batch_size=2)
    return run, pd.read_parquet(out)


def test_manifest_csv_rows_and_paths(fleet_dir):
    root, _ = fleet_dir
    homes = read_manifest(root / "homes.csv")
    assert [h.home_id for h in homes] == ["h1", "h2", "bad", "h3", "h4"]
    assert [h.row for h in homes] == [2, 3, 4, 5, 6]  # header = row 1
    assert homes[0].log == str(root / "logs" / "h1.csv")
    assert homes[3].floor_area_m2 is None and homes[1].floor_area_m2 == 95.5
    assert homes[4].partition == {"home_id": "h4"} and homes[4].log == str(root / "dataset")


@pytest.mark.parametrize("body, where", [
    ("id,log,floor_area_m2\nh1,a.csv,120\nh2,b.csv,12 m2\n", "homes.csv, row 3, column 'floor_area_m2'"),
    ("id,log,floor_area_m2\nh1,a.csv,120\nh2,b.csv,0.5\n", "homes.csv, row 3, column 'floor_area_m2'"),
    ("id,log\nh1,a.csv\n\nh1,b.csv\n", "homes.csv, row 4, column 'id'"),
    ("id,log,site\nh1,a.csv,\"45,-300\"\n", "homes.csv, row 2, column 'site'"),
    ("id,log\nh1,\n", "homes.csv, row 2, column 'log'"),
    ("id,log,site\nh1,a.csv,45,-90\n", "homes.csv, row 2"),
    ("id,log,colour\nh1,a.csv,red\n", "homes.csv, row 1, column 'colour'"),
    ("id,log,partition\nh1,d,home_id\n", "homes.csv, row 2, column 'partition'"),
    ("id,log,tz\nh1,a.csv,Mars/Olympus\n", "homes.csv, row 2, column 'tz'"),
    ("id,log,ground_c,ground_share\nh1,a.csv,9,1.5\n", "homes.csv, row 2, column 'ground_share'"),
    ("id,log,ground_c,ground_share\nh1,a.csv,warm,0.1\n", "homes.csv, row 2, column 'ground_c'"),
    ("id,log,ground_c\nh1,a.csv,9\n", "homes.csv, row 2, column 'ground_c'"),
    ("id,log,ground_share\nh1,a.csv,0.1\n", "homes.csv, row 2, column 'ground_share'"),
    ("id,log,window_areas\nh1,a.csv,S=8;E\n", "homes.csv, row 2, column 'window_areas'"),
    ("id,log,window_areas\nh1,a.csv,S=-2\n", "homes.csv, row 2, column 'window_areas'"),
])
def test_manifest_csv_errors_name_row_and_column(tmp_path, body, where):
    path = tmp_path / "homes.csv"
    path.write_text(body)
    with pytest.raises(InputError) as info:
        read_manifest(path)
    assert str(info.value).startswith(where + ": ")


def test_manifest_toml_defaults_filters_and_rows(tmp_path):
    path = tmp_path / "homes.toml"
    path.write_text(
        '[defaults]\nsite = "45,-90"\nlog = "data/logs.parquet"\n\n'
        '[[home]]\nid = "a"\npartition = "home_id=1"\nfloor_area_m2 = 80\n\n'
        '[[home]]\nid = "b"\nfilters = {home_id = 2}\n\n'
        '[[home]]\nid = "c"\nlog = "c.csv"\nsite = "45,-90"\n'
    )
    homes = read_manifest(path)
    assert [h.row for h in homes] == [5, 10, 14]
    assert homes[0].partition == {"home_id": "1"} and homes[1].partition == {"home_id": "2"}
    assert homes[1].log == str(tmp_path / "data" / "logs.parquet") and homes[2].log == str(tmp_path / "c.csv")
    path.write_text('[[home]]\nid = "a"\nlog = "a.csv"\n\n[[home]]\nid = "b"\nlog = "b.csv"\nfloor_area_m2 = "big"\n')
    with pytest.raises(InputError) as info:
        read_manifest(path)
    assert str(info.value).startswith("homes.toml, row 8, column 'floor_area_m2': ")


def test_bad_home_is_one_error_row_and_the_rest_go_on(local_run):
    run, frame = local_run
    assert list(frame.columns) == [name for name, _ in RESULT_COLUMNS]
    assert frame["home_id"].tolist() == ["h1", "h2", "bad", "h3", "h4"]  # manifest order
    bad = frame.set_index("home_id").loc["bad"]
    assert bad["status"] == "error"
    # The reader's own message: the file, the editor's line number and the column.
    assert bad["error"].startswith("bad.csv, row 40, column 'indoor_c':") and "\n" not in bad["error"]
    assert math.isnan(bad["ua_w_per_k"])
    good = frame[frame["home_id"] != "bad"]
    assert (good["status"] == "ok").all() and good["error"].isna().all()
    assert run.n_errors == 1 and run.n_run == 5 and run.n_skipped == 0


def test_rows_match_the_single_home_chain_and_the_truth(fleet_dir, local_run):
    root, truth = fleet_dir
    _, frame = local_run
    rows = frame.set_index("home_id")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = calibrate_files(root / "logs" / "h1.csv", site=SITE, model="2R2C")
    assert rows.loc["h1", "ua_w_per_k"] == pytest.approx(single.heat_loss_coefficient_w_per_k, rel=1e-9)
    assert rows.loc["h1", "tau1_h"] == pytest.approx(single.time_constants_h[0], rel=1e-9)
    assert rows.loc["h1", "cv_rmse_pct"] == pytest.approx(single.fit["cv_rmse_pct"], rel=1e-9)
    assert rows.loc["h1", "heating_share"] == pytest.approx(single.extras["heating_share"], rel=1e-9)
    assert rows.loc["h1", "log_sha256"] == single.extras["provenance"]["inputs"]["log"]["sha256"]
    for home in ("h1", "h2", "h3", "h4"):
        # Series resistances (module docstring); 15 % covers ten days of noisy data.
        assert rows.loc[home, "ua_w_per_k"] == pytest.approx(truth[home], rel=0.15), home
        assert rows.loc[home, "model"] == "2R2C" and rows.loc[home, "tau1_h"] > rows.loc[home, "tau2_h"]
    assert rows.loc["h1", "ua_per_floor_area_w_per_m2k"] == pytest.approx(rows.loc["h1", "ua_w_per_k"] / 120)
    assert math.isnan(rows.loc["h3", "ua_per_floor_area_w_per_m2k"])  # no floor area given
    assert (frame["seconds"] > 0).all() and frame["thermorc_version"].notna().all()


def test_summary_matches_numpy_on_the_rows(local_run):
    run, frame = local_run
    summary = pd.read_csv(run.summary_csv).set_index("quantity")
    ok = frame[frame["status"] == "ok"]
    for name in ("ua_w_per_k", "ua_per_floor_area_w_per_m2k", "tau1_h", "cv_rmse_pct"):
        v = ok[name].dropna().to_numpy()
        # numpy.percentile, linear interpolation (Hyndman and Fan 1996, definition 7)
        assert summary.loc[name, "count"] == len(v)
        assert summary.loc[name, "p10"] == pytest.approx(np.percentile(v, 10), rel=1e-5)
        assert summary.loc[name, "p50"] == pytest.approx(np.median(v), rel=1e-5)
        assert summary.loc[name, "p90"] == pytest.approx(np.percentile(v, 90), rel=1e-5)
        assert summary.loc[name, "mean"] == pytest.approx(v.mean(), rel=1e-5)
    assert summary.loc["ua_per_floor_area_w_per_m2k", "count"] == 3
    assert summary.loc["homes", "count"] == 5 and summary.loc["homes_error", "count"] == 1
    assert summary.loc["homes_ok", "count"] == 4
    assert summary.loc["homes_flagged", "count"] == int((ok["n_warnings"] > 0).sum())
    assert summary.loc["homes_heating_share_low", "count"] == int((ok["heating_share"] < 0.45).sum())
    assert summary.loc["heating_share", "count"] == ok["heating_share"].notna().sum() > 0
    assert run.summary_csv == summary_path(run.out) and run.summary_csv.endswith("RESULTS.summary.csv")


def test_resume_skips_homes_already_done(fleet_dir, tmp_path):
    root, _ = fleet_dir
    part = tmp_path / "part.csv"
    lines = (root / "homes.csv").read_text().splitlines()
    part.write_text("\n".join(lines[:3]) + "\n")  # h1, h2
    (tmp_path / "logs").symlink_to(root / "logs")
    (tmp_path / "dataset").symlink_to(root / "dataset")
    full = tmp_path / "full.csv"
    full.write_text((root / "homes.csv").read_text())
    out = tmp_path / "RESULTS.parquet"
    first = run_fleet(part, out, workers=1, model="2R2C")
    assert first.n_run == 2
    before = pd.read_parquet(out).set_index("home_id")
    second = run_fleet(full, out, workers=2, model="2R2C")
    assert second.n_skipped == 2 and second.n_run == 3
    after = pd.read_parquet(out).set_index("home_id")
    assert sorted(after.index) == ["bad", "h1", "h2", "h3", "h4"]
    # The seconds of a home are measured when it runs: equal values mean it was not run again.
    assert after.loc["h1", "seconds"] == before.loc["h1", "seconds"]
    third = run_fleet(full, out, workers=1, model="2R2C", retry_errors=True)
    assert third.n_run == 1 and third.n_skipped == 4
    with pytest.raises(InputError, match="was made with --model 2R2C"):
        run_fleet(full, out, workers=1, model="1R1C")
    assert not os.path.exists(lock_path(out))  # released on the error path too


def test_interruption_keeps_finished_batches_and_the_old_output(fleet_dir, tmp_path):
    root, _ = fleet_dir
    out = tmp_path / "RESULTS.parquet"
    seen = []

    def stop_after_first_batch(row):
        seen.append(row["home_id"])
        if len(seen) == 3:  # first home of the second batch
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_fleet(root / "homes.csv", out, workers=1, model="2R2C", batch_size=2, on_row=stop_after_first_batch)
    assert not out.exists()
    assert not [f for f in os.listdir(tmp_path) if f.startswith(".tmp-")]  # no half-written file left
    assert not os.path.exists(lock_path(out))  # released on an interruption
    parts = sorted(os.listdir(journal_path(out)))
    assert len(parts) == 1 and pq.read_table(os.path.join(journal_path(out), parts[0])).num_rows == 2
    run = run_fleet(root / "homes.csv", out, workers=2, model="2R2C", batch_size=2)
    assert run.n_skipped == 2 and run.n_run == 3
    assert not os.path.exists(journal_path(out))
    assert sorted(pd.read_parquet(out)["home_id"]) == ["bad", "h1", "h2", "h3", "h4"]


def _own_fleet(fleet_dir, tmp_path, area_h1=120):
    """Copies of h1, h2 (CSV logs) and h4 (hive dataset) that a test may change, and their manifest."""
    root, _ = fleet_dir
    (tmp_path / "logs").mkdir(parents=True)
    for name in ("h1", "h2"):
        shutil.copy(root / "logs" / f"{name}.csv", tmp_path / "logs" / f"{name}.csv")
    shutil.copytree(root / "dataset", tmp_path / "dataset")
    manifest = tmp_path / "homes.csv"
    manifest.write_text(
        "id,log,partition,site,floor_area_m2\n"
        f"h1,logs/h1.csv,,\"{SITE}\",{area_h1}\n"
        f"h2,logs/h2.csv,,\"{SITE}\",95.5\n"
        f"h4,dataset,home_id=h4,\"{SITE}\",150\n"
    )
    return manifest


def _nudge_csv_log(path, line=100):
    """Change one indoor temperature by 0.1 K on one line (the file stays a valid log)."""
    lines = path.read_text().splitlines()
    cells = lines[line - 1].split(",")
    cells[1] = f"{float(cells[1]) + 0.1:.1f}"
    lines[line - 1] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")


def test_resume_recalculates_exactly_the_homes_whose_log_changed(fleet_dir, tmp_path):
    manifest = _own_fleet(fleet_dir, tmp_path)
    out = tmp_path / "RESULTS.parquet"
    first = run_fleet(manifest, out, workers=1, model="2R2C")
    assert (first.n_new, first.n_stale, first.n_skipped) == (3, 0, 0)
    before = pd.read_parquet(out).set_index("home_id")
    # The stored fingerprint is a SHA-256 (FIPS 180-4): 64 hex digits, one per home.
    assert before["inputs_sha256"].str.fullmatch("[0-9a-f]{64}").all() and before["inputs_sha256"].nunique() == 3

    # Same bytes, new modification time: a content hash sees no change.
    os.utime(tmp_path / "logs" / "h1.csv", ns=(1, 1))
    _nudge_csv_log(tmp_path / "logs" / "h2.csv")
    seen = []
    second = run_fleet(manifest, out, workers=1, model="2R2C", on_start=lambda n, counts: seen.append((n, counts)))
    assert seen == [(1, {"kept": 2, "stale": 1, "retried": 0, "new": 0})]
    assert (second.n_skipped, second.n_stale, second.n_new, second.n_run) == (2, 1, 0, 1)
    after = pd.read_parquet(out).set_index("home_id")
    assert sorted(after.index) == ["h1", "h2", "h4"]  # one row per home, the stale row replaced
    # A home's seconds are measured when it runs: equal values mean it was not run again.
    assert after.loc["h1", "seconds"] == before.loc["h1", "seconds"]
    assert after.loc["h4", "seconds"] == before.loc["h4", "seconds"]
    assert after.loc["h2", "seconds"] != before.loc["h2", "seconds"]
    assert after.loc["h2", "inputs_sha256"] != before.loc["h2", "inputs_sha256"]
    # The new row is of the new file: its log digest is hashlib's SHA-256 of the changed bytes.
    assert after.loc["h2", "log_sha256"] == hashlib.sha256((tmp_path / "logs" / "h2.csv").read_bytes()).hexdigest()

    # A hive partition: a changed file in this home's folder makes this home, and only it, stale.
    part = tmp_path / "dataset" / "home_id=h4"
    (name,) = os.listdir(part)
    frame = pd.read_parquet(part / name)
    frame.loc[50, "indoor_c"] += 0.1
    frame.to_parquet(part / name, index=False)
    third = run_fleet(manifest, out, workers=1, model="2R2C")
    assert (third.n_skipped, third.n_stale, third.n_run) == (2, 1, 1)
    last = pd.read_parquet(out).set_index("home_id")
    assert last.loc["h2", "seconds"] == after.loc["h2", "seconds"]
    assert last.loc["h4", "seconds"] != after.loc["h4", "seconds"]


def test_resume_recalculates_a_home_whose_floor_area_changed(fleet_dir, tmp_path):
    manifest = _own_fleet(fleet_dir, tmp_path)
    out = tmp_path / "RESULTS.parquet"
    run_fleet(manifest, out, workers=1, model="1R1C")
    before = pd.read_parquet(out).set_index("home_id")
    manifest = _own_fleet(fleet_dir, tmp_path / "moved", area_h1=80)  # new area; same files elsewhere
    run = run_fleet(manifest, out, workers=1, model="1R1C")
    # Paths count only through their content: the moved h2 and h4 are kept.
    assert (run.n_skipped, run.n_stale, run.n_run) == (2, 1, 1)
    after = pd.read_parquet(out).set_index("home_id")
    assert after.loc["h2", "seconds"] == before.loc["h2", "seconds"]
    assert after.loc["h1", "floor_area_m2"] == 80
    assert after.loc["h1", "ua_per_floor_area_w_per_m2k"] == pytest.approx(after.loc["h1", "ua_w_per_k"] / 80)
    # The --gains option is an input too: every home is stale under another gains model.
    homes = read_manifest(manifest)
    assert input_fingerprint(homes[0], "1R1C", "day_night") != input_fingerprint(homes[0], "1R1C", "constant")


def test_output_without_fingerprints_is_refused_in_one_line(fleet_dir, tmp_path):
    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\n")
    out = tmp_path / "R.parquet"
    old = pd.DataFrame({name: pd.Series([], dtype=kind) for name, kind in RESULT_COLUMNS if name != "inputs_sha256"})
    old.to_parquet(out, index=False)
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "1R1C"])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: R.parquet: was written by an older thermorc")
    assert "write to a new --out, or delete it" in lines[0]
    assert sorted(os.listdir(tmp_path)) == ["R.parquet", "homes.csv"]  # untouched, no lock left


HOLD_LOCK = (
    "import sys\n"
    "from thermorc.fleet import OutputLock\n"
    "lock = OutputLock(sys.argv[1]).acquire()\n"
    "print('ready', flush=True)\n"
    "sys.stdin.read()\n"
    "lock.release()\n"
)


def test_cli_second_run_on_a_held_output_exits_2_naming_the_holder(fleet_dir, tmp_path):
    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\n")
    out = tmp_path / "R.parquet"
    holder = subprocess.Popen([sys.executable, "-c", HOLD_LOCK, str(out)], stdin=subprocess.PIPE,
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "ready"
        result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "1R1C"])
        assert result.exit_code == 2
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1, lines
        assert lines[0].startswith("thermorc: error: R.parquet: is being written by another thermorc fleet run ")
        assert f"pid {holder.pid} on host {socket.gethostname()}" in lines[0]
        assert not out.exists() and os.path.exists(lock_path(out))  # the holder's lock is left alone
    finally:
        holder.stdin.close()
        holder.wait(timeout=30)
    assert not os.path.exists(lock_path(out))  # the holder released it
    # A lock from another host cannot be checked from here: refused, naming that host.
    with open(lock_path(out), "w") as handle:
        json.dump({"pid": 1, "host": "elsewhere.invalid", "started": "2024-01-01T00:00:00+00:00"}, handle)
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "1R1C"])
    assert result.exit_code == 2 and "pid 1 on host elsewhere.invalid" in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1 and not out.exists()


def test_cli_takes_over_a_stale_lock_of_a_dead_process(fleet_dir, tmp_path):
    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\n")
    out = tmp_path / "R.parquet"
    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait(timeout=30)  # reaped: its pid no longer runs
    with open(lock_path(out), "w") as handle:
        json.dump({"pid": gone.pid, "host": socket.gethostname(), "started": "2024-01-01T00:00:00+00:00"}, handle)
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "1R1C"])
    assert result.exit_code == 0, result.output
    assert f"thermorc: warning: R.parquet: took over a lock left by pid {gone.pid}, which is not running" in result.stderr
    assert pd.read_parquet(out)["home_id"].tolist() == ["h1"]
    assert not os.path.exists(lock_path(out))  # released at the end


def test_calibrate_home_never_raises(tmp_path):
    from thermorc.fleet import HomeSpec

    row = calibrate_home(HomeSpec(home_id="gone", log=str(tmp_path / "missing.csv"), site=SITE))
    assert row["status"] == "error" and row["error"] == "missing.csv: no such file"
    row = calibrate_home({"home_id": "p", "log": str(tmp_path), "partition": {"home_id": "zz"}})
    assert row["status"] == "error" and "partition column 'home_id'" in row["error"]
    row = calibrate_home({"home_id": "d", "log": str(tmp_path)})
    assert row["status"] == "error" and "is a folder (expected a log file, or a partition" in row["error"]


def test_dask_cluster_gives_the_local_pool_results(fleet_dir, local_run, tmp_path):
    distributed = pytest.importorskip("distributed")
    root, _ = fleet_dir
    _, local = local_run
    out = tmp_path / "RESULTS.parquet"
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, protocol="tcp://", dashboard_address=None,
                                  host="127.0.0.1") as cluster:
        run = run_fleet(root / "homes.csv", out, scheduler=cluster.scheduler_address, model="2R2C", batch_size=3)
    remote = pd.read_parquet(out)
    assert run.n_run == 5
    skip = ["seconds"]  # wall time differs run to run
    pd.testing.assert_frame_equal(remote.drop(columns=skip), local.drop(columns=skip))


def test_cli_runs_and_prints_summary(fleet_dir, tmp_path):
    root, _ = fleet_dir
    out = tmp_path / "R.parquet"
    manifest = tmp_path / "two.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\n")
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "2R2C"])
    assert result.exit_code == 0, result.output
    assert "ua_w_per_k" in result.stdout and "licensed professional" in result.stdout
    assert pd.read_parquet(out)["model"].tolist() == ["2R2C"]
    assert (tmp_path / "R.summary.csv").exists()
    quiet = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--quiet", "--model", "2R2C"])
    assert quiet.exit_code == 0 and quiet.stdout == ""


def test_cli_bad_manifest_one_line_exit_2_no_output(tmp_path):
    manifest = tmp_path / "homes.csv"
    manifest.write_text("id,log,floor_area_m2\nh1,a.csv,-4\n")
    out = tmp_path / "R.parquet"
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: homes.csv, row 2, column 'floor_area_m2': ")
    assert not out.exists() and not (tmp_path / "R.summary.csv").exists()
    assert os.listdir(tmp_path) == ["homes.csv"]


def test_cli_workers_and_scheduler_are_exclusive(tmp_path):
    manifest = tmp_path / "homes.csv"
    manifest.write_text("id,log\nh1,a.csv\n")
    out = tmp_path / "R.parquet"
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "2", "--scheduler",
                                 "tcp://127.0.0.1:8786"])
    assert result.exit_code == 2
    assert result.stderr.strip() == ("thermorc: error: --workers sets the local pool; a Dask cluster has its own "
                                     "workers (give one of them)")
    assert not out.exists()


def test_partition_rows_give_the_single_file_result_without_a_temporary_file(fleet_dir, tmp_path, monkeypatch):
    """A home in a hive dataset is calibrated from its rows in memory, as if they were a file of their own."""
    import tempfile

    import pyarrow as pa

    root, _ = fleet_dir
    folder = root / "dataset" / "home_id=h4"
    # Reference: the same rows written as an ordinary Parquet log and read through the single-home chain.
    alone = tmp_path / "h4.parquet"
    pq.write_table(pq.read_table(folder), alone)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = calibrate_files(alone, site=SITE, model="1R1C")

    def no_temporary_files(*args, **kwargs):
        raise AssertionError("a temporary file was written")

    monkeypatch.setattr(tempfile, "mkstemp", no_temporary_files)
    row = calibrate_home({"home_id": "h4", "log": str(root / "dataset"), "partition": {"home_id": "h4"}, "site": SITE},
                         model="1R1C")
    assert row["status"] == "ok", row["error"]
    assert row["ua_w_per_k"] == single.heat_loss_coefficient_w_per_k
    assert row["cv_rmse_pct"] == single.fit["cv_rmse_pct"] and row["n_samples"] == single.fit["n_samples"]
    # The digest of the rows as read: SHA-256 (hashlib) of the Arrow IPC stream (pyarrow's writer).
    table = pq.read_table(folder)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    assert row["log_sha256"] == hashlib.sha256(sink.getvalue()).hexdigest()


def test_a_bad_cell_in_a_partition_names_the_dataset_and_the_row(tmp_path):
    import pyarrow as pa

    log, _ = simulate_log(6, days=4)
    frame = log.reset_index()
    frame["indoor_c"] = frame["indoor_c"].astype(str)
    frame.loc[9, "indoor_c"] = "warm"
    frame["home_id"] = "q1"
    ds.write_dataset(pa.Table.from_pandas(frame, preserve_index=False), tmp_path / "d", format="parquet",
                     partitioning=["home_id"], partitioning_flavor="hive")
    row = calibrate_home({"home_id": "q1", "log": str(tmp_path / "d"), "partition": {"home_id": "q1"}, "site": SITE})
    # Record 9 is the 11th row when the header counts as row 1 (thermorc.errors).
    assert row["status"] == "error"
    assert row["error"] == "d[home_id=q1], row 11, column 'indoor_c': 'warm' is not a number (expected a decimal number)"


@pytest.mark.parametrize("parts", [1, 2])
def test_a_home_folder_reads_as_pyarrow_reads_the_dataset(tmp_path, parts):
    # Reference: pyarrow.parquet.read_table on the home's folder (dataset discovery, which skips
    # names starting with '.' or '_'), whether the folder holds one file or several.
    from thermorc.fleet import _partition_frame

    log, _ = simulate_log(7, days=2)
    folder = tmp_path / "logs" / "home_id=a1"
    folder.mkdir(parents=True)
    frame = log.reset_index()
    for k, rows in enumerate(np.array_split(np.arange(len(frame)), parts)):
        frame.iloc[rows].to_parquet(folder / f"part-{k}.parquet", index=False)
    (folder / "_SUCCESS").write_text("")
    (folder / ".part-0.parquet.crc").write_bytes(b"\x00\x01")
    got, digest = _partition_frame(str(tmp_path / "logs"), {"home_id": "a1"})
    ref = pq.read_table(folder)
    pd.testing.assert_frame_equal(got, ref.to_pandas().reset_index(drop=True), check_exact=True)
    assert len(got) == len(frame) and len(digest) == 64 and int(digest, 16) >= 0


def test_rows_come_back_in_input_order_with_a_bounded_window():
    # Whatever order the workers finish in, rows leave in input order, and no more than
    # `window` homes are ever out between the oldest unwritten one and the newest sent.
    from thermorc.fleet import _InOrder

    rng = np.random.default_rng(3)
    order = _InOrder(range(40), window=5)
    out, flying = [], []
    while True:
        flying += order.take()
        if not flying:
            break
        assert max(i for i, _ in flying) - order.head < 5
        i, home = flying.pop(rng.integers(len(flying)))
        order.done(i, home)
        out += list(order.ready())
    assert out == list(range(40))


@pytest.mark.parametrize("header, cells, fields, options, column", [
    ("ground_c,ground_share", ("9", "0.2"), {"ground_c": 9.0, "ground_share": 0.2},
     {"ground_c": 9.0, "ground_share": 0.2}, "ua_w_per_k"),
    # The façade weights change the solar input, so the aperture moves.
    ("window_areas", ("S=8;E=1;W=1;N=2",), {"window_areas": "S=8;E=1;W=1;N=2"},
     {"window_areas": "S=8,E=1,W=1,N=2"}, "solar_aperture_m2"),
])
def test_a_manifest_option_reaches_the_calibration(fleet_dir, tmp_path, header, cells, fields, options, column):
    # The same home with and without the option: the row is calibrate_files' result with it,
    # and only the home with it gets a new fingerprint.
    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    log = root / "logs" / "h1.csv"
    empty = "," * (len(cells) - 1)
    manifest.write_text(f"id,log,site,{header}\nplain,{log},\"{SITE}\",{empty}\nx,{log},\"{SITE}\",{','.join(cells)}\n")
    homes = read_manifest(manifest)
    assert all(getattr(homes[0], k) is None for k in fields)
    assert {k: getattr(homes[1], k) for k in fields} == fields
    assert input_fingerprint(homes[0], model="2R2C") == input_fingerprint(
        homes[0].__class__(home_id="plain", log=str(log), site=SITE), model="2R2C")
    assert input_fingerprint(homes[1], model="2R2C") != input_fingerprint(homes[0], model="2R2C")
    out = tmp_path / "R.parquet"
    run_fleet(manifest, out, workers=1, model="2R2C")
    rows = pd.read_parquet(out).set_index("home_id")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = flatten_result(calibrate_files(log, site=SITE, model="2R2C", **options), homes[1], "2R2C")
    assert rows.loc["x", column] == pytest.approx(single[column], rel=1e-9)
    assert rows.loc["x", column] != pytest.approx(rows.loc["plain", column], rel=1e-3)


def test_held_out_days_fill_the_test_columns(fleet_dir, local_run, tmp_path):
    # --test-days for a fleet is calibrate --test-days per home: each row carries the
    # single-home chain's validation, the summary counts the homes whose held-out heating
    # misses ASHRAE Guideline 14's hourly limits (CV(RMSE) 30 %, NMBE +-10 %), and a run
    # without held-out days leaves the columns empty and the count out.
    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\nh2,{root / 'logs' / 'h2.csv'},\"{SITE}\"\n"
                        f"short,{root / 'logs' / 'h3.csv'},\"{SITE}\"\n")
    homes = read_manifest(manifest)
    assert input_fingerprint(homes[0], model="2R2C", test_days=3) != input_fingerprint(homes[0], model="2R2C")
    out = tmp_path / "R.parquet"
    run = run_fleet(homes[:2], out, workers=1, model="2R2C", test_days=3)
    rows = pd.read_parquet(out).set_index("home_id")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = calibrate_files(root / "logs" / "h1.csv", site=SITE, model="2R2C", test_days=3)
    val = single.extras["validation"]
    assert val["days"] == 3.0 and rows.loc["h1", "test_days"] == 3.0
    for column, key in (("test_rmse_k", "rmse_k"), ("test_bias_k", "bias_k"), ("test_cv_rmse_pct", "cv_rmse_pct"),
                        ("test_nmbe_pct", "nmbe_pct"), ("test_heating_share", "heating_share")):
        assert rows.loc["h1", column] == pytest.approx(val[key], rel=1e-9), column
    assert rows.loc["h1", "ua_w_per_k"] == pytest.approx(single.heat_loss_coefficient_w_per_k, rel=1e-9)
    # The held-out days' cautions have a column of their own (none for these days).
    assert val["warnings"] == [] and pd.isna(rows.loc["h1", "test_warnings"])
    body = single.to_dict()
    body["validation"]["warnings"] = ["the held-out days lean on the sun", "a second caution"]
    row = flatten_result(body, homes[0], "2R2C")
    assert row["test_warnings"] == "the held-out days lean on the sun | a second caution"
    assert "sun" not in (row["warnings"] or "")
    summary = run.summary.set_index("quantity")
    outside = ((rows["test_cv_rmse_pct"] > 30) | (rows["test_nmbe_pct"].abs() > 10)).sum()
    assert summary.loc["homes_test_outside_hourly_limits", "count"] == outside
    assert summary.loc["test_rmse_k", "count"] == 2
    plain = local_run[1]
    assert plain["test_rmse_k"].isna().all()
    assert not {"homes_test_outside_hourly_limits", "test_rmse_k"} & set(local_run[0].summary["quantity"])
    # Held-out days that leave nothing to fit are that home's error, not the run's.
    run_fleet(homes[2:], tmp_path / "S.parquet", workers=1, model="2R2C", test_days=12)
    bad = pd.read_parquet(tmp_path / "S.parquet").iloc[0]
    assert bad["status"] == "error" and "--test-days 12 leaves nothing to calibrate on" in bad["error"]


def test_cli_test_days_must_be_positive(fleet_dir, tmp_path):
    root, _ = fleet_dir
    out = tmp_path / "R.parquet"
    r = runner.invoke(app, ["fleet", str(root / "homes.csv"), "--out", str(out), "--test-days", "0", "--workers", "1"])
    assert r.exit_code == 2 and "--test-days 0 is not allowed" in r.output
    assert len(r.output.strip().splitlines()) == 1 and not out.exists()


def test_gains_hours_reach_every_home_and_its_fingerprint(fleet_dir, tmp_path):
    # fleet --gains four-period --gains-hours is calibrate's per home; other hours are another
    # calculation on resume, and hours that do not fit the periods stop the run in one line.
    from thermorc.result import gains_schedule

    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site\nh1,{root / 'logs' / 'h1.csv'},\"{SITE}\"\n")
    homes = read_manifest(manifest)
    late = gains_schedule("four_period", [9, 12, 20, 2])
    assert input_fingerprint(homes[0], model="2R2C", gains=late) != input_fingerprint(homes[0], model="2R2C",
                                                                                     gains="four_period")
    out = tmp_path / "R.parquet"
    result = runner.invoke(app, ["fleet", str(manifest), "--out", str(out), "--workers", "1", "--model", "2R2C",
                                 "--gains", "four-period", "--gains-hours", "9,12,20,2", "--quiet"])
    assert result.exit_code == 0, result.output
    row = pd.read_parquet(out).iloc[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = calibrate_files(root / "logs" / "h1.csv", site=SITE, model="2R2C", gains=late)
    assert row["status"] == "ok" and row["ua_w_per_k"] == pytest.approx(single.heat_loss_coefficient_w_per_k, rel=1e-9)
    bad = runner.invoke(app, ["fleet", str(manifest), "--out", str(tmp_path / "B.parquet"), "--gains-hours", "7,23"])
    assert bad.exit_code == 2
    assert bad.stderr.strip().startswith("thermorc: error: --gains-hours need gains by day and night")
    assert not (tmp_path / "B.parquet").exists()


def test_a_households_own_gains_hours_in_the_manifest(fleet_dir, tmp_path):
    # A manifest column gives one household its own hours (a TOML list or a text); the run's
    # --gains must suit their count, else that home alone is an error row; hours that could
    # never be periods are refused when the manifest is read, naming its row and column.
    from thermorc.result import gains_schedule

    root, _ = fleet_dir
    manifest = tmp_path / "homes.csv"
    manifest.write_text(f"id,log,site,gains_hours\nlate,{root / 'logs' / 'h1.csv'},\"{SITE}\",9;12;20;2\n"
                        f"usual,{root / 'logs' / 'h2.csv'},\"{SITE}\",\n")
    homes = read_manifest(manifest)
    assert homes[0].gains_hours == (9.0, 12.0, 20.0, 2.0) and homes[1].gains_hours is None
    assert input_fingerprint(homes[0], gains="four_period") != input_fingerprint(
        dataclasses.replace(homes[0], gains_hours=None), gains="four_period")
    out = tmp_path / "R.parquet"
    run_fleet(homes, out, workers=1, model="2R2C", gains="four_period")
    rows = pd.read_parquet(out).set_index("home_id")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = calibrate_files(root / "logs" / "h1.csv", site=SITE, model="2R2C",
                                 gains=gains_schedule("four_period", [9, 12, 20, 2]))
    assert rows.loc["late", "ua_w_per_k"] == pytest.approx(single.heat_loss_coefficient_w_per_k, rel=1e-9)
    run_fleet(homes, tmp_path / "D.parquet", workers=1, model="2R2C", gains="day_night")
    rows = pd.read_parquet(tmp_path / "D.parquet").set_index("home_id")
    assert rows.loc["late", "status"] == "error" and "column 'gains_hours'" in rows.loc["late", "error"]
    assert "day-night" in rows.loc["late", "error"] and rows.loc["usual", "status"] == "ok"
    toml = tmp_path / "homes.toml"
    toml.write_text(f'[[home]]\nid = "a"\nlog = "{root / "logs" / "h1.csv"}"\ngains_hours = [7, 23]\n')
    assert read_manifest(toml)[0].gains_hours == (7.0, 23.0)
    for bad in ("9;20;12;2", "9;12;20", "six;9;17;23"):
        manifest.write_text(f"id,log,gains_hours\nh1,{root / 'logs' / 'h1.csv'},{bad}\n")
        with pytest.raises(InputError) as info:
            read_manifest(manifest)
        assert info.value.column == "gains_hours" and info.value.row == 2
