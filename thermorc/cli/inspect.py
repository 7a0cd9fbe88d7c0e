"""``thermorc inspect``: the data-quality report of a log and the model order it supports."""

from __future__ import annotations

import enum
import json
from pathlib import Path
from typing import Annotated, Optional

import typer

from thermorc import quality
from thermorc.align import align
from thermorc.cli._app import app
from thermorc.cli._common import IntervalLabel, guarded, out_console
from thermorc.read import read_log
from thermorc.write import _clean_for_json, write_json

EPILOG = "Example: thermorc inspect site_log.csv --map logger.toml --tz America/New_York --json"


class ModelOrder(str, enum.Enum):
    r1c1 = "1R1C"
    r2c2 = "2R2C"
    r3c2 = "3R2C"
    r4c3 = "4R3C"


@app.command(epilog=EPILOG)
@guarded
def inspect(
    log: Annotated[Path, typer.Argument(help="Log file: CSV, Parquet or Excel (see docs/data-formats.md).",
                                        show_default=False)],
    column_map: Annotated[Optional[Path], typer.Option(
        "--map", help="Column map (TOML) for any layout other than the canonical CSV.",
        rich_help_panel="Inputs")] = None,
    tz: Annotated[Optional[str], typer.Option(
        "--tz", help="IANA time zone of naive local times, e.g. America/New_York.",
        rich_help_panel="Inputs")] = None,
    interval: Annotated[Optional[IntervalLabel], typer.Option(
        "--interval", help="Power values are means over the interval starting (default) or ending at "
                           "their stamp.", rich_help_panel="Inputs")] = None,
    weather: Annotated[bool, typer.Option(
        "--weather-file/--no-weather-file", help="Outdoor temperature will come from a weather file.",
        rich_help_panel="Inputs")] = False,
    step_min: Annotated[Optional[float], typer.Option(
        "--step-min", min=1.0, max=1440.0, help="Model grid step \\[min]; default: the log's own step.",
        rich_help_panel="Model")] = None,
    require: Annotated[Optional[ModelOrder], typer.Option(
        "--require", help="Exit with code 2 unless the data can identify this model order.",
        rich_help_panel="Model")] = None,
    as_json: Annotated[bool, typer.Option(
        "--json", help="Print the report as JSON instead of text.", rich_help_panel="Output")] = False,
    out: Annotated[Optional[Path], typer.Option(
        "--out", help="Also write the JSON report to this file.", rich_help_panel="Output",
        dir_okay=False)] = None,
):
    """Report span, gaps, heating duty, free-floating periods and which RC model the log supports."""
    data, meta = read_log(log, column_map=column_map, tz=tz, interval=interval.value if interval else None)
    step_s = step_min * 60.0 if step_min is not None else max(meta["median_step_s"], 60.0)
    aligned = align(data, step_s, path=str(log))
    report = quality.inspect_log(aligned, has_weather=weather)
    body = report.to_dict()
    body["source"] = {"path": str(log), "format": meta["source_format"], "rows": meta["rows"], "tz": meta["tz"],
                      "columns": meta["columns"], "notes": meta["notes"]}
    if out is not None:
        write_json(out, body)
    if as_json:
        typer.echo(json.dumps(_clean_for_json(body), indent=2, allow_nan=False, default=str))
    else:
        out_console.print(f"log         {log.name} ({meta['source_format']}, {meta['rows']} rows, {meta['tz']})",
                          markup=False)
        for note in meta["notes"]:
            out_console.print(f"note        {note}", markup=False)
        out_console.print(report.to_text(), markup=False)
    if require is not None:
        quality.require_model(report, require.value, path=str(log))
