"""
The ``thermorc`` command line: one typer app, one module per command.

This package holds no physics. Each command parses its options, calls the library, writes
its outputs atomically and exits: 0 on success, 2 on bad input or usage, 1 on an internal
error (a bug: one line with a hint to report it; the traceback only under ``--debug``).
Command modules register themselves on :data:`app` when imported below.
"""

from __future__ import annotations

from thermorc.cli._app import app  # noqa: F401

# Command modules: importing one registers its command on ``app``.
from thermorc.cli import _commands  # noqa: E402,F401


def main():
    """
    Entry point of the ``thermorc`` console script.

    A usage error (a missing argument, an unknown option, a file that does not exist, a value
    not among the choices) is one line on stderr and exit code 2, like every other bad input;
    ``thermorc`` alone, or a command without its arguments, still shows its help.
    """
    import sys

    import typer

    try:  # recent typer carries its own copy of click
        from typer._click import exceptions as cli_errors
    except ImportError:
        from click import exceptions as cli_errors

    from thermorc.cli._common import err_console

    try:
        code = app(standalone_mode=False)
    except cli_errors.UsageError as exc:
        if type(exc).__name__ == "NoArgsIsHelpError":
            exc.show()
        else:
            command = exc.ctx.command_path if exc.ctx is not None else "thermorc"
            err_console.print(f"thermorc: error: {exc.format_message()} (see '{command} --help')", markup=False)
        code = 2
    except typer.Abort:
        code = 130
    sys.exit(code if isinstance(code, int) else 0)
