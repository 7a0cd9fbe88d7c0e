"""``thermorc report``: the monthly report of one home, as HTML (and PDF) with CSV tables."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from thermorc.cli._app import app
from thermorc.cli._common import err_console, guarded, out_console

EPILOG = "Example: thermorc report docs/examples/home.toml --month 2023-02 --out report_out --pdf"


@app.command(epilog=EPILOG)
@guarded
def report(
    home: Annotated[Path, typer.Argument(
        metavar="HOME.toml", help="Home file (TOML, see docs/formats.md): log, weather, construction, strategies.",
        show_default=False, rich_help_panel="Inputs")],
    month: Annotated[str, typer.Option(
        "--month", help="Calendar month of the report, YYYY-MM (local time of the log).", rich_help_panel="Inputs",
        show_default=False)],
    out: Annotated[Path, typer.Option(
        "--out", help="Folder for report-YYYY-MM.html, its CSV tables and the PDF.", file_okay=False,
        rich_help_panel="Output", show_default=False)],
    pdf: Annotated[bool, typer.Option("--pdf", help="Also write a PDF of the figures and tables.",
                                      rich_help_panel="Output")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", help="Print nothing but warnings and errors.",
                                        rich_help_panel="Output")] = False,
):
    """Write the monthly report of a home: data quality, calibration, Guideline 14, energy drift, cautions."""
    from thermorc.report import build_report, parse_month, read_home, write_report

    parse_month(month)
    home_file = read_home(home)
    if quiet:
        found = build_report(home_file, month)
    else:
        with err_console.status("reading the home file", spinner="dots") as status:
            found = build_report(home_file, month, progress=lambda line: status.update(line))
    paths = write_report(found, out, pdf=pdf)
    if not quiet:
        f = found.facts
        out_console.print(
            f"{f['home']}, {f['month']}: metered {f['metered_kwh']:,.0f} kWh, model {f['expected_kwh']:,.0f} kWh; "
            f"UA {f['heat_loss_coefficient_w_per_k']:.0f} W/K (model {f['model']})", markup=False)
        out_console.print(f"wrote {paths[0]} and {len(paths) - 1} more file(s) in {out}", markup=False)
