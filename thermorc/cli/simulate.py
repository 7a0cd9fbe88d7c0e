"""``thermorc simulate``: open-loop prediction of indoor temperature from a calibrated model."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from thermorc.cli._app import app
from thermorc.cli._common import IntervalLabel, guarded, out_console

EPILOG = "Example: thermorc simulate RESULT.json --log site_log.csv --weather site.epw --out SIM.csv"


@app.command(epilog=EPILOG)
@guarded
def simulate(
    result_file: Annotated[Path, typer.Argument(help="RESULT.json from thermorc calibrate.", exists=True, dir_okay=False, show_default=False)],
    log: Annotated[Path, typer.Option("--log", help="Log with the measured heating (and weather).", exists=True, dir_okay=False, rich_help_panel="Inputs")],
    out: Annotated[Path, typer.Option("--out", help="CSV to write: time, indoor_c and node temperatures.", dir_okay=False, rich_help_panel="Output")],
    column_map: Annotated[Optional[Path], typer.Option("--map", help="Column map (TOML) for other layouts.", exists=True, dir_okay=False, rich_help_panel="Inputs")] = None,
    tz: Annotated[Optional[str], typer.Option("--tz", help="IANA time zone of naive times.", rich_help_panel="Inputs")] = None,
    interval: Annotated[Optional[IntervalLabel], typer.Option("--interval", help="Powers are means over the interval starting (default) or ending at their stamp.", rich_help_panel="Inputs")] = None,
    weather: Annotated[Optional[Path], typer.Option("--weather", help="TMY3, EPW or weather CSV for outdoor temperature and irradiance.", exists=True, dir_okay=False, rich_help_panel="Inputs")] = None,
    site: Annotated[Optional[str], typer.Option("--site", help="LAT,LON in decimal degrees, for the clear-sky fallback.", rich_help_panel="Inputs")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", help="Print nothing but warnings and errors.", rich_help_panel="Output")] = False,
):
    """Predict indoor temperature open loop from the log's measured heating and weather."""
    from thermorc.chain import simulate_files
    from thermorc.write import write_csv

    frame, rmse = simulate_files(result_file, log, column_map=column_map, tz=tz, weather=weather, site=site,
                                 interval=interval.value if interval else None)
    write_csv(out, frame)
    if not quiet:
        fit = f"; RMSE against the measured indoor temperature {rmse:.2f} K" if rmse == rmse else ""
        out_console.print(f"wrote {out} ({len(frame)} rows){fit}", markup=False)
        if frame.attrs.get("initial_state"):
            out_console.print(f"initial node temperatures: {frame.attrs['initial_state']}", markup=False)
