"""
The end-to-end demo on the bundled, invented demo data (see weather_demo/README.md).

The demo home, 27 Larchmere Row in the invented town of Quillhaven, is invented: its log and
weather come from :mod:`thermorc.synthetic`. The demo runs the whole job in order (inspect the
log, calibrate with ``auto``, check the construction, forecast a year under the demo weather,
compare setback strategies, write the monthly report) and writes each stage's output to one
folder. Every number it prints comes from the library; nothing here is computed twice.
"""

from __future__ import annotations

import os
import time
from pathlib import Path

from thermorc.errors import InputError

__all__ = ["run_demo", "demo_paths", "DEMO_MONTH"]

#: The month the demo's report covers (the demo log holds January and February 2023).
DEMO_MONTH = "2023-02"

#: The invented home's heater output, as in weather_demo/README.md. [W]
DEMO_CAPACITY_W = 10000.0


def demo_paths(root=None):
    """
    Where the demo's input files are.

    Parameters
    ----------
    root : str or os.PathLike, optional
        Repository folder holding ``weather_demo/`` and ``docs/examples/``; default: the
        folder above the installed package (a source checkout).

    Returns
    -------
    dict
        ``log``, ``weather``, ``site``, ``construction``, ``schedule``, ``strategies`` ->
        path or ``None`` when that file is missing.

    Raises
    ------
    InputError
        When the demo log or weather file is missing.
    """
    base = Path(root) if root is not None else Path(__file__).resolve().parents[1]
    data = base / "weather_demo"
    found = {
        "log": data / "log.csv",
        "weather": data / "weather.csv",
        "site": data / "site.toml",
        "construction": data / "construction.toml",
        "schedule": base / "docs" / "examples" / "schedule.toml",
        "strategies": base / "docs" / "examples" / "strategies.toml",
    }
    for key in ("log", "weather"):
        if not found[key].is_file():
            raise InputError(f"the demo data are missing (expected {found[key]}; run weather_demo/make_demo_data.py "
                             "in a source checkout)", path=str(found[key]))
    return {k: (str(v) if v.is_file() else None) for k, v in found.items()}


def _stage(name, log, skipped):
    """Run one stage; a stage whose module is missing is reported in one line and skipped."""
    def wrap(func):
        try:
            return func()
        except ImportError as exc:
            skipped.append(name)
            log(f"{name}: skipped ({exc.name or 'a module'} is not available in this version)")
            return None
    return wrap


def run_demo(out_dir, log=print, progress=None, root=None, model="auto"):
    """
    Run the demo and write its outputs to ``out_dir``.

    Parameters
    ----------
    out_dir : str or os.PathLike
        Output folder (created when missing).
    log : callable
        Receives the short summary, one line at a time.
    progress : callable, optional
        Receives the name of each stage as it starts (for a spinner).
    root : str or os.PathLike, optional
        Repository folder (see :func:`demo_paths`).
    model : {'auto', '1R1C', '2R2C', '3R2C', '4R3C'}
        Model of the calibration stage.

    Returns
    -------
    dict
        What was found (also written to ``out_dir/demo_summary.json``): per-stage figures,
        the files written, the seconds taken and the stages skipped.
    """
    from thermorc.write import write_json, write_text

    progress = progress or (lambda line: None)
    started = time.perf_counter()
    paths = demo_paths(root)
    site = {}
    if paths["site"]:
        from thermorc.schedule import read_toml

        site = {k: v for k, v in read_toml(paths["site"]).items() if k in ("latitude", "longitude", "altitude_m", "tz")}
    tz = site.get("tz", "America/Chicago")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written, skipped, summary = [], [], {"note": "invented demo data: an invented home in an invented town"}
    log("Demo home: 27 Larchmere Row, Quillhaven (invented; see weather_demo/README.md)")

    # 1. Inspect.
    def inspect():
        from thermorc import quality
        from thermorc.chain import prepare_log

        progress("inspecting the log")
        prepared = prepare_log(paths["log"], tz=tz, weather_path=paths["weather"])
        found = quality.inspect_log(prepared.aligned, has_weather=True)
        write_json(out / "quality.json", found.to_dict())
        write_text(out / "quality.txt", found.to_text() + "\n")
        written.extend(["quality.json", "quality.txt"])
        summary["inspect"] = {"verdict": found.verdict, "supported": list(found.supported)}
        log(f"inspect    {found.span['days']:.0f} days of log; {found.verdict}")
        return found

    _stage("inspect", log, skipped)(inspect)

    # 2. Calibrate.
    def calibrate():
        from thermorc.chain import calibrate_files

        from thermorc.estimate import MODEL_ORDER

        progress(f"calibrating ({model}: comparing {', '.join(MODEL_ORDER)})" if model == "auto" else "calibrating")
        res = calibrate_files(paths["log"], tz=tz, weather=paths["weather"], construction=paths["construction"],
                              model=model)
        write_json(out / "RESULT.json", res.to_dict())
        written.append("RESULT.json")
        lo, hi = (res.intervals.get("heat_loss_coefficient_w_per_k") or [float("nan")] * 2)[:2]
        summary["calibrate"] = {"model": res.model, "ua_w_per_k": res.heat_loss_coefficient_w_per_k,
                                "ua_95_w_per_k": [lo, hi], "time_constants_h": list(res.time_constants_h),
                                "rmse_k": res.fit.get("rmse_k")}
        log(f"calibrate  model {res.model}: UA {res.heat_loss_coefficient_w_per_k:.0f} W/K (95 %: {lo:.0f} to "
            f"{hi:.0f}), time constants " + ", ".join(f"{t:.1f}" for t in res.time_constants_h)
            + f" h, RMSE {res.fit.get('rmse_k', float('nan')):.2f} K")
        return res

    result = _stage("calibrate", log, skipped)(calibrate)
    if result is None:
        raise InputError("the calibration stage is not available, so the demo cannot go on")

    # 3. Biot check.
    def biot():
        from thermorc.construction import analyse_construction, read_construction

        progress("checking the construction (Biot)")
        found = analyse_construction(read_construction(paths["construction"]), timestep_s=result.step_s)
        write_json(out / "biot.json", found)
        written.append("biot.json")
        w, rec = found["whole_home"], found["recommendation"]
        summary["biot"] = {"construction_ua_w_per_k": w["ua_w_per_k"], "suggested_model": rec["preset"]}
        log(f"biot       construction UA {w['ua_w_per_k']:.0f} W/K, time constant {w['time_constant_h']:.0f} h; "
            f"suggests {rec['preset']}")

    if paths["construction"]:
        _stage("biot", log, skipped)(biot)
    else:
        log("biot       skipped (no weather_demo/construction.toml)")

    # 4. Forecast.
    def forecast_stage():
        from thermorc.forecast import forecast
        from thermorc.read import read_weather
        from thermorc.report import model_weather
        from thermorc.schedule import Schedule, read_schedule
        from thermorc.write import write_csv

        progress("forecasting a year of the demo weather")
        weather, meta = read_weather(paths["weather"], tz=tz)
        weather = model_weather(result, weather, site)
        schedule = read_schedule(paths["schedule"]) if paths["schedule"] else Schedule.constant(20.5)
        found = forecast(result, weather, setpoint=schedule, capacity_w=DEMO_CAPACITY_W, metadata=meta, tz=tz)
        write_json(out / "forecast.json", found.summary)
        hourly = found.frame[["indoor_c", "setpoint_c", "heating_w", "outdoor_c"]].resample("1h").mean()
        write_csv(out / "forecast_hourly.csv", hourly)
        written.extend(["forecast.json", "forecast_hourly.csv"])
        s = found.summary
        summary["forecast"] = {"heating_kwh": s["heating_kwh"], "peak_hourly_heating_w": s["peak_hourly_heating_w"],
                               "unmet_hours": s["unmet_hours"]}
        log(f"forecast   {s['heating_kwh']:,.0f} kWh a year under the demo weather, peak hour "
            f"{s['peak_hourly_heating_w']:,.0f} W, {s['unmet_hours']:.0f} unmet hours")
        return weather

    weather = _stage("forecast", log, skipped)(forecast_stage)

    # 5. Setback comparison.
    def setback_stage():
        from thermorc.setback import compare, read_strategies
        from thermorc.write import write_csv

        progress("comparing setback strategies")
        found = compare(result, weather, read_strategies(paths["strategies"]), tz=tz)
        write_csv(out / "setback.csv", found.table)
        write_json(out / "setback.json", found.to_dict())
        written.extend(["setback.csv", "setback.json"])
        best = found.table["savings_pct"].iloc[1:].idxmax()
        summary["setback"] = {"best": best, "savings_pct": float(found.table.loc[best, "savings_pct"])}
        log(f"setback    {len(found.table) - 1} strategies against '{found.table.index[0]}'; most saving: "
            f"'{best}' ({found.table.loc[best, 'savings_pct']:.1f} %)")

    if weather is not None and paths["strategies"]:
        _stage("setback", log, skipped)(setback_stage)
    else:
        log("setback    skipped (no strategies file or no forecast weather)")

    # 6. Monthly report.
    def report_stage():
        from thermorc.report import build_report, parse_home, write_report

        progress(f"writing the monthly report for {DEMO_MONTH}")
        home = parse_home({
            "name": "27 Larchmere Row, Quillhaven (invented)",
            "floor_area_m2": 120.0,
            "log": {"file": paths["log"], "tz": tz},
            "weather": paths["weather"],
            **({"site": paths["site"]} if paths["site"] else {}),
            **{k: paths[k] for k in ("construction", "schedule", "strategies") if paths[k]},
        }, path=str(out / "demo_home.toml"))
        found = build_report(home, DEMO_MONTH, result=result, progress=progress)
        files = write_report(found, out / "report", pdf=False)
        written.extend(os.path.relpath(p, out) for p in files)
        f = found.facts
        summary["report"] = {"month": DEMO_MONTH, "metered_kwh": f["metered_kwh"], "expected_kwh": f["expected_kwh"],
                             "html": os.path.relpath(files[0], out)}
        log(f"report     {DEMO_MONTH}: metered {f['metered_kwh']:,.0f} kWh, model {f['expected_kwh']:,.0f} kWh "
            f"-> {os.path.relpath(files[0], out)}")

    _stage("report", log, skipped)(report_stage)

    summary["files"] = written
    summary["skipped"] = skipped
    summary["seconds"] = time.perf_counter() - started
    write_json(out / "demo_summary.json", summary)
    log(f"wrote {len(written) + 1} files to {out} in {summary['seconds']:.0f} s")
    return summary

