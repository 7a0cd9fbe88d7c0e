"""``thermorc forecast``: heating energy, peak and comfort of a calibrated home under a weather file."""

from __future__ import annotations

import enum
import json
from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.progress import track

from thermorc.cli._app import app
from thermorc.cli._common import err_console, guarded, out_console
from thermorc.errors import InputError
from thermorc.forecast import DEFAULT_DEADBAND_K, UNMET_TOLERANCE_K, forecast as run_forecast
from thermorc.read import read_weather
from thermorc.result import CalibrationResult
from thermorc.schedule import read_schedule
from thermorc.write import _clean_for_json, write_csv, write_json

EPILOG = ("Example: thermorc forecast result.json --weather 723170TYA.CSV --schedule schedule.toml "
          "--capacity-w 9000 --out forecast.csv --summary summary.json")

#: Columns of FORECAST.csv, in order (the frame's units are in the names).
CSV_COLUMNS = ("indoor_c", "indoor_mean_c", "setpoint_c", "heating_w", "shortfall_w", "heater_on", "outdoor_c",
               "ghi_w_m2", "internal_w")


class Heater(str, enum.Enum):
    ideal = "ideal"
    capacity = "capacity"
    thermostat = "thermostat"


def _num(x, spec=",.0f"):
    return "-" if x is None else format(x, spec)


def _summary_text(s):
    """Plain-text summary of a forecast summary dict (for people)."""
    w = s.get("weather") or {}
    heater = s["heater"] + (f", {s['capacity_w']:,.0f} W" if s.get("capacity_w") else "")
    lines = [
        f"Forecast     {w.get('name') or 'weather'} ({w.get('source_format') or '?'}), {s['start'][:10]} to "
        f"{s['end'][:10]}, step {s['step_s']:g} s, heater {heater}, schedule {s['schedule']}",
        f"Heating      {_num(s['heating_kwh'])} kWh a year",
    ]
    mc = s.get("monte_carlo")
    if mc:
        e = mc["heating_kwh"]
        lines.append(f"             P10 / P50 / P90 {_num(e['p10'])} / {_num(e['p50'])} / {_num(e['p90'])} kWh "
                     f"({mc['n_draws']} draws from the calibration covariance)")
    lines += [
        f"Peak         {_num(s['peak_heating_w'])} W over one step, {_num(s['peak_hourly_heating_w'])} W over one "
        f"hour, at {s['peak_time'][:16]}",
        f"Unmet        {s['unmet_hours']:.1f} h with indoor more than {s['unmet_tolerance_k']:g} K below the "
        f"setpoint; comfort deficit {s['comfort_degree_hours_k_h']:.0f} K h",
    ]
    if s.get("cycles") is not None:
        lines.append(f"Cycles       {s['cycles']:,} on-cycles of the thermostat")
    d = s["design"]
    lines.append(
        f"Design load  {_num(d['load_99_6_w'])} W at the file's 99.6 % dry-bulb {d['dry_bulb_99_6_c']:.1f} degC, "
        f"{_num(d['load_99_w'])} W at 99 % {d['dry_bulb_99_c']:.1f} degC (UA {s['ua_w_per_k']:.0f} W/K, indoor "
        f"{d['setpoint_c']:g} degC, gains ignored)")
    dh = s["degree_hours"]
    share = dh.get("implied_gain_utilisation")
    lines.append(
        f"Degree-hours UA x {dh['degree_hours_k_h']:,.0f} K h = {_num(dh['ua_degree_hours_kwh'])} kWh against "
        f"{_num(dh['simulated_kwh'])} kWh simulated; the {_num(dh['difference_kwh'])} kWh difference is "
        + (f"{100 * share:.0f} % of the {_num(dh['gains_kwh'])} kWh solar and internal gains" if share is not None
           else "not explained by gains (no gains)"))
    months = s["monthly_kwh"]
    lines.append("Monthly kWh  " + "  ".join(f"{k[-2:]}: {v:,.0f}" for k, v in months.items()))
    lines.append("")
    lines += [f"Caution: {c}" for c in s["cautions"]]
    return "\n".join(lines)


@app.command(epilog=EPILOG)
@guarded
def forecast(
    result_file: Annotated[Path, typer.Argument(
        metavar="RESULT.json", help="Calibration result written by thermorc.", show_default=False)],
    weather: Annotated[Path, typer.Option(
        "--weather", help="Weather file: TMY3, EPW or the canonical weather CSV.", rich_help_panel="Inputs",
        show_default=False)],
    out: Annotated[Path, typer.Option(
        "--out", help="Per-interval forecast (CSV).", rich_help_panel="Output", dir_okay=False,
        show_default=False)],
    setpoint: Annotated[Optional[float], typer.Option(
        "--setpoint", help="Constant indoor setpoint \\[degC]; default 20 when no --schedule.",
        rich_help_panel="Inputs")] = None,
    schedule: Annotated[Optional[Path], typer.Option(
        "--schedule", help="Weekly setpoint schedule (TOML, see docs/forecasting.md).", rich_help_panel="Inputs")] = None,
    tz: Annotated[Optional[str], typer.Option(
        "--tz", help="IANA zone whose clock the schedule follows (default: the weather file's own clock).",
        rich_help_panel="Inputs")] = None,
    heater: Annotated[Optional[Heater], typer.Option(
        "--heater", help="ideal, capacity (limited, shortfall counted) or thermostat (on/off, cycles counted); "
                         "default: capacity with --capacity-w, else ideal.", rich_help_panel="Model")] = None,
    capacity_w: Annotated[Optional[float], typer.Option(
        "--capacity-w", min=1.0, help="Heater output \\[W].", rich_help_panel="Model")] = None,
    deadband_k: Annotated[float, typer.Option(
        "--deadband-k", min=0.0, help="Thermostat switching differential \\[K].", rich_help_panel="Model")
    ] = DEFAULT_DEADBAND_K,
    step_s: Annotated[float, typer.Option(
        "--step-s", min=10.0, max=3600.0, help="Model step \\[s]; must divide one hour.", rich_help_panel="Model")
    ] = 300.0,
    tolerance_k: Annotated[float, typer.Option(
        "--tolerance-k", min=0.0, help="Unmet hours count indoor below the setpoint by more than this \\[K].",
        rich_help_panel="Model")] = UNMET_TOLERANCE_K,
    draws: Annotated[int, typer.Option(
        "--draws", min=0, max=2000, help="Monte Carlo draws for P10/P50/P90 (0: none).", rich_help_panel="Model")
    ] = 40,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the Monte Carlo draws.", rich_help_panel="Model")] = 0,
    summary: Annotated[Optional[Path], typer.Option(
        "--summary", help="Summary figures (JSON).", rich_help_panel="Output", dir_okay=False)] = None,
    as_json: Annotated[bool, typer.Option(
        "--json", help="Print the summary as JSON instead of text.", rich_help_panel="Output")] = False,
    quiet: Annotated[bool, typer.Option(
        "--quiet", help="Print nothing on success (the files still hold the cautions).",
        rich_help_panel="Output")] = False,
):
    """Forecast heating energy, peak, unmet hours and design loads of a calibrated home under a weather file."""
    if setpoint is not None and schedule is not None:
        raise InputError("give --setpoint or --schedule, not both", column="--schedule")
    calibration = CalibrationResult.from_json(result_file)
    program = read_schedule(schedule) if schedule is not None else (20.0 if setpoint is None else setpoint)
    data, meta = read_weather(weather, tz=tz)
    try:
        found = run_forecast(calibration, data, program, heater=heater.value if heater else None,
                             capacity_w=capacity_w, deadband_k=deadband_k, step_s=step_s, tolerance_k=tolerance_k,
                             n_draws=draws, seed=seed, tz=tz, metadata=meta,
                             progress=lambda it, total: track(it, total=total, description="Monte Carlo draws",
                                                              console=err_console, transient=True, disable=quiet))
    except InputError as exc:
        raise exc.located(path=str(weather) if exc.column in ("outdoor_c", "ghi_w_m2", "time") else None) from None
    frame = found.frame[[c for c in CSV_COLUMNS if c in found.frame.columns]]
    body = {"result": str(result_file), "weather_file": str(weather), **found.summary}
    # Write the summary first: if the CSV cannot be written, no stale CSV pairs with a new summary.
    if summary is not None:
        write_json(summary, body)
    write_csv(out, frame)
    if quiet:
        return
    if as_json:
        typer.echo(json.dumps(_clean_for_json(body), indent=2, allow_nan=False, default=str))
        return
    out_console.print(_summary_text(found.summary), markup=False)
    out_console.print(f"\nWrote {out}" + (f" and {summary}" if summary is not None else ""), markup=False)
