"""The typer app object, apart from the package so command modules can import it."""

from __future__ import annotations

import typer

from thermorc import __version__
from thermorc.cli._common import STATE

app = typer.Typer(
    name="thermorc",
    help=(
        "Calibrate RC thermal models of homes from thermostat logs, then forecast heating "
        "demand and compare setback strategies."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    epilog="Start with: thermorc demo --out demo_out (the whole job on invented demo data), then see docs/user-guide.md",
)


def _version_callback(value: bool):
    if value:
        typer.echo(f"thermorc {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version_callback, is_eager=True, help="Show the version and exit."
    ),
    debug: bool = typer.Option(False, "--debug", help="Show a traceback on internal errors."),
):
    """Calibrate RC thermal models of homes from thermostat logs."""
    STATE["debug"] = debug
