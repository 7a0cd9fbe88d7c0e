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
    """Entry point of the ``thermorc`` console script."""
    app()
