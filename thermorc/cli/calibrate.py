"""``thermorc calibrate``: fit an RC model to a log and write RESULT.json."""

from __future__ import annotations

import enum
import json
from pathlib import Path
from typing import Annotated, Optional

import typer

from thermorc.cli._app import app
from thermorc.cli._common import GAINS_HOURS_HELP, IntervalLabel, gains_option, guarded, out_console
from thermorc.write import _clean_for_json, write_json

EPILOG = "Example: thermorc calibrate site_log.csv --weather site.epw --model auto --out RESULT.json"


class ModelChoice(str, enum.Enum):
    r1c1 = "1R1C"
    r2c2 = "2R2C"
    r3c2 = "3R2C"
    r4c3 = "4R3C"
    auto = "auto"


class EstimatorChoice(str, enum.Enum):
    output_error = "output-error"
    prediction_error = "prediction-error"


class GainsChoice(str, enum.Enum):
    constant = "constant"
    day_night = "day-night"
    four_period = "four-period"


InputFile = Annotated[Path, typer.Argument(help="Log file: CSV, Parquet or Excel.", exists=True, dir_okay=False, show_default=False)]


@app.command(epilog=EPILOG)
@guarded
def calibrate(
    log: InputFile,
    out: Annotated[Path, typer.Option("--out", help="RESULT.json to write.", dir_okay=False, rich_help_panel="Output")],
    column_map: Annotated[Optional[Path], typer.Option("--map", help="Column map (TOML) for other layouts.", exists=True, dir_okay=False, rich_help_panel="Inputs")] = None,
    tz: Annotated[Optional[str], typer.Option("--tz", help="IANA time zone of naive times, e.g. America/New_York.", rich_help_panel="Inputs")] = None,
    interval: Annotated[Optional[IntervalLabel], typer.Option("--interval", help="Powers are means over the interval starting (default) or ending at their stamp.", rich_help_panel="Inputs")] = None,
    weather: Annotated[Optional[Path], typer.Option("--weather", help="TMY3, EPW or weather CSV for outdoor temperature and irradiance.", exists=True, dir_okay=False, rich_help_panel="Inputs")] = None,
    site: Annotated[Optional[str], typer.Option("--site", help="LAT,LON in decimal degrees, for the clear-sky fallback.", rich_help_panel="Inputs")] = None,
    construction: Annotated[Optional[Path], typer.Option("--construction", help="Construction TOML: judge the calibrated UA and capacity against it.", exists=True, dir_okay=False, rich_help_panel="Inputs")] = None,
    window_areas: Annotated[Optional[str], typer.Option("--window-areas", help="Window area per façade \\[m²], e.g. S=8,E=3,W=3,N=4: weights the sun on each façade (default: all alike, or the construction's windows).", rich_help_panel="Inputs")] = None,
    ground_c: Annotated[Optional[float], typer.Option("--ground-c", help="Constant ground temperature under floors on the ground \\[°C]; part of the heat loss then goes to it.", rich_help_panel="Inputs")] = None,
    ground_share: Annotated[Optional[float], typer.Option("--ground-share", help="Share of the heat loss that goes to the ground (0..0.9); default: from the construction's ground_floor elements.", rich_help_panel="Inputs")] = None,
    model: Annotated[ModelChoice, typer.Option("--model", help="RC model, or auto to compare 1R1C, 2R2C and 3R2C on held-out days (4R3C, with interior mass, only when asked for).", rich_help_panel="Model")] = ModelChoice.auto,
    gains: Annotated[GainsChoice, typer.Option("--gains", help="Unlogged internal gains: one constant; a day (07-23 h) and a night value; or four periods (06-09, 09-17, 17-23, 23-06 h).", rich_help_panel="Model")] = GainsChoice.constant,
    gains_hours: Annotated[Optional[str], typer.Option("--gains-hours", help=GAINS_HOURS_HELP, rich_help_panel="Model")] = None,
    estimator: Annotated[EstimatorChoice, typer.Option("--estimator", help="Output error (least squares on the open-loop indoor temperature) or prediction error (Kalman-filter likelihood).", rich_help_panel="Model")] = EstimatorChoice.output_error,
    test_days: Annotated[Optional[float], typer.Option("--test-days", help="Keep the log's last days back and report how the model predicts them (validation in RESULT.json).", rich_help_panel="Model")] = None,
    step_min: Annotated[Optional[float], typer.Option("--step-min", min=1.0, max=180.0, help="Model step \\[min]; default: the log's own step.", rich_help_panel="Model")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print RESULT.json to stdout as well.", rich_help_panel="Output")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", help="Print nothing but warnings and errors.", rich_help_panel="Output")] = False,
):
    """Calibrate a 1R1C, 2R2C, 3R2C or 4R3C model from a log: UA, time constants, solar aperture."""
    from thermorc.chain import calibrate_files

    result = calibrate_files(
        log, column_map=column_map, tz=tz, interval=interval.value if interval else None, weather=weather,
        site=site, construction=construction, model=model.value, gains=gains_option(gains.value, gains_hours),
        step_s=step_min * 60.0 if step_min else None, progress=not quiet and not as_json, ground_c=ground_c,
        ground_share=ground_share, method=estimator.value.replace("-", "_"), test_days=test_days,
        window_areas=window_areas,
    )
    body = result.to_dict()
    write_json(out, body)
    if as_json:
        typer.echo(json.dumps(_clean_for_json(body), indent=2, allow_nan=False, default=str))
    elif not quiet:
        out_console.print(result.summary(), markup=False)
        out_console.print(f"wrote {out}", markup=False)
