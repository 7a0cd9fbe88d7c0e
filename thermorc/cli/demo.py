"""``thermorc demo``: the whole job on the bundled, invented demo data."""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import Annotated

import typer

from thermorc.cli._app import app
from thermorc.cli._common import err_console, guarded, out_console
from thermorc.errors import ThermorcWarning


@app.command(epilog="Example: thermorc demo --out demo_out")
@guarded
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo outputs.", file_okay=False,
                                      rich_help_panel="Output")] = Path("demo_out"),
    quiet: Annotated[bool, typer.Option("--quiet", help="Print nothing but errors.", rich_help_panel="Output")] = False,
):
    """Run the whole job on the bundled demo data (an invented home): inspect, calibrate, check, forecast, report."""
    from thermorc.demo import run_demo

    log = (lambda line: None) if quiet else (lambda line: out_console.print(line, markup=False))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ThermorcWarning)
        if quiet:
            run_demo(out, log=log)
        else:
            with err_console.status("starting", spinner="dots") as status:
                run_demo(out, log=log, progress=lambda line: status.update(line))
    found = sorted({str(w.message) for w in caught if issubclass(w.category, ThermorcWarning)})
    if found and not quiet:
        # The calibration's warnings are kept in RESULT.json and the report; one line here.
        err_console.print(f"thermorc: {len(found)} model warning(s), listed in {out}/RESULT.json and the report",
                          markup=False)
