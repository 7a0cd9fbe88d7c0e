"""``thermorc setback``: compare setback strategies with a baseline under a weather file."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Optional

import typer

from thermorc.cli._app import app
from thermorc.cli._common import guarded, out_console
from thermorc.cli.forecast import Heater
from thermorc.forecast import UNMET_TOLERANCE_K
from thermorc.read import read_weather
from thermorc.result import CalibrationResult
from thermorc.setback import compare, read_strategies
from thermorc.write import _clean_for_json, write_csv, write_json

EPILOG = ("Example: thermorc setback result.json --weather 723170TYA.CSV --strategies strategies.toml "
          "--capacity-w 9000 --out comparison.csv")


def _cell(value, spec):
    if value is None or value != value:  # None or NaN
        return "-".rjust(int(spec.split(".")[0].replace(",", "") or 0))
    return format(value, spec)


def _comparison_text(comparison):
    """Plain-text comparison table and cautions (for people)."""
    t = comparison.table
    heater, capacity_w = comparison.settings["heater"], comparison.settings["capacity_w"]
    head = (f"{'strategy':<28} {'kWh':>8} {'saved %':>7} {'peak rec. W':>11} {'unmet h':>8} {'K h':>7} "
            f"{'min C':>6} {'min occ C':>9} {'rec. h':>6} {'max h':>6} {'lead h':>6}")
    lines = [f"Heater {heater}" + (f", {capacity_w:,.0f} W" if capacity_w else ""), head, "-" * len(head)]
    for name, r in t.iterrows():
        lead = comparison.details[name].get("lead_h", {}).get("mean")
        lines.append(
            f"{name[:28]:<28} {r['heating_kwh']:>8,.0f} {_cell(r['savings_pct'], '7.1f')} "
            f"{_cell(r['peak_recovery_w'], '11,.0f')} {r['unmet_hours']:>8.1f} {r['comfort_degree_hours_k_h']:>7.0f} "
            f"{r['min_indoor_c']:>6.1f} {_cell(r['min_occupied_indoor_c'], '9.1f')} "
            f"{_cell(r['mean_recovery_h'], '6.2f')} {_cell(r['max_recovery_h'], '6.2f')} {_cell(lead, '6.2f')}")
    lines += ["", "saved %: annual heating energy against the first row; peak rec.: largest heating power from the "
              "control rise to the end of recovery; unmet h and K h: against each strategy's own comfort schedule; "
              "rec. h: mean time after the occupied start until indoor is within the tolerance; lead h: mean "
              "optimal-start lead.", ""]
    for name, d in comparison.details.items():
        for c in d["cautions"]:
            if c.startswith("On "):
                lines.append(f"{name}: {c}")
    lines += [f"Caution: {c}" for c in comparison.cautions]
    return "\n".join(lines)


@app.command(epilog=EPILOG)
@guarded
def setback(
    result_file: Annotated[Path, typer.Argument(
        metavar="RESULT.json", help="Calibration result written by thermorc.", show_default=False)],
    weather: Annotated[Path, typer.Option(
        "--weather", help="Weather file: TMY3, EPW or the canonical weather CSV.", rich_help_panel="Inputs",
        show_default=False)],
    strategies: Annotated[Path, typer.Option(
        "--strategies", help="Baseline and strategies (TOML, see docs/forecasting.md).", rich_help_panel="Inputs",
        show_default=False)],
    tz: Annotated[Optional[str], typer.Option(
        "--tz", help="IANA zone whose clock the schedules follow (default: the weather file's own clock).",
        rich_help_panel="Inputs")] = None,
    heater: Annotated[Optional[Heater], typer.Option(
        "--heater", help="ideal, capacity or thermostat; default: the file's, else capacity with a capacity.",
        rich_help_panel="Model")] = None,
    capacity_w: Annotated[Optional[float], typer.Option(
        "--capacity-w", min=1.0, help="Heater output \\[W]; overrides the file's.", rich_help_panel="Model")] = None,
    deadband_k: Annotated[Optional[float], typer.Option(
        "--deadband-k", min=0.0, help="Thermostat switching differential \\[K].", rich_help_panel="Model")] = None,
    step_s: Annotated[float, typer.Option(
        "--step-s", min=10.0, max=3600.0, help="Model step \\[s]; must divide one hour.", rich_help_panel="Model")
    ] = 300.0,
    tolerance_k: Annotated[float, typer.Option(
        "--tolerance-k", min=0.0, help="Unmet and recovery tolerance below the setpoint \\[K].",
        rich_help_panel="Model")] = UNMET_TOLERANCE_K,
    out: Annotated[Optional[Path], typer.Option(
        "--out", help="Comparison table, one row per strategy (CSV).", rich_help_panel="Output", dir_okay=False)] = None,
    summary: Annotated[Optional[Path], typer.Option(
        "--summary", help="Everything, monthly figures and optimal-start times included (JSON).",
        rich_help_panel="Output", dir_okay=False)] = None,
    as_json: Annotated[bool, typer.Option(
        "--json", help="Print the full comparison as JSON instead of the table.", rich_help_panel="Output")] = False,
    quiet: Annotated[bool, typer.Option(
        "--quiet", help="Print nothing on success.", rich_help_panel="Output")] = False,
):
    """Compare setback strategies with a baseline: energy, savings, recovery peak, comfort and optimal start."""
    calibration = CalibrationResult.from_json(result_file)
    plan = read_strategies(strategies)
    data, _ = read_weather(weather, tz=tz)
    found = compare(calibration, data, plan, heater=heater.value if heater else None, capacity_w=capacity_w,
                    deadband_k=deadband_k, step_s=step_s, tolerance_k=tolerance_k, tz=tz)
    body = {"result": str(result_file), "weather_file": str(weather), "strategies_file": str(strategies),
            **found.to_dict()}
    if summary is not None:
        write_json(summary, body)
    if out is not None:
        write_csv(out, found.table)
    if quiet:
        return
    if as_json:
        typer.echo(json.dumps(_clean_for_json(body), indent=2, allow_nan=False, default=str))
        return
    out_console.print(_comparison_text(found), markup=False)
    written = [str(p) for p in (out, summary) if p is not None]
    if written:
        out_console.print(f"\nWrote {' and '.join(written)}", markup=False)
