"""
The ``thermorc`` command line: one typer app, one module per command.

This package holds no physics. Each command parses its options, calls the library, writes
its outputs atomically and exits: 0 on success, 2 on bad input or usage, 1 on an internal
error (a bug: one line with a hint to report it; the traceback only under ``--debug``).
Command modules register themselves on :data:`app` when imported below.
"""

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
    epilog="Example: thermorc inspect site_log.csv --tz America/New_York",
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


# Command modules: importing one registers its command on ``app``.
from thermorc.cli import _commands  # noqa: E402,F401


def main():
    """Entry point of the ``thermorc`` console script."""
    app()
