"""Shared pieces of the command line: error handling and terminal output."""

from __future__ import annotations

import enum
import functools
import sys
import traceback
import warnings

import typer
from rich.console import Console

from thermorc.errors import InputError, ThermorcWarning

STATE = {"debug": False}


class IntervalLabel(str, enum.Enum):
    """Whether a log's power values are means over the interval starting or ending at their stamp."""

    start = "start"
    end = "end"


GAINS_HOURS_HELP = ("Start hours of the gains periods in the order of the day, e.g. 9,12,20,2 for four periods "
                    "(morning, daytime, evening, night) or 7,23 for day and night; default 6,9,17,23 and 7,23.")


def gains_option(gains, hours_text, option="--gains-hours"):
    """
    The gains model of a command: its name, or its schedule with the household's hours.

    Parameters
    ----------
    gains : str
        ``constant``, ``day-night`` or ``four-period`` (as typed).
    hours_text : str or None
        Comma-separated start hours [h, local time].
    option : str
        Name of the option, for messages.

    Returns
    -------
    str or dict
        The name (``day_night`` spelling) when no hours are given; else the schedule
        (:func:`thermorc.result.gains_schedule`).
    """
    from thermorc.result import gains_schedule, parse_gains_hours

    name = gains.replace("-", "_")
    if hours_text is None:
        return name
    return gains_schedule(name, parse_gains_hours(hours_text, option), where=option)


err_console = Console(stderr=True, highlight=False, soft_wrap=True)
out_console = Console(highlight=False, soft_wrap=True)

ISSUE_HINT = "this is a bug in thermorc; please report it with the command line you ran"


def fail(message: str, code: int = 2):
    """Print one line to stderr and exit with ``code``."""
    err_console.print(f"thermorc: error: {message}", markup=False)
    raise typer.Exit(code=code)


def guarded(func):
    """
    Run a command body with the exit-code contract.

    ``InputError`` (and ``OSError`` on a named file) -> one line, exit 2. Anything else is a
    bug -> one line, exit 1, traceback only under ``--debug``. Warnings of the thermorc family
    are printed as one line each on stderr.
    """

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ThermorcWarning)
            try:
                result = func(*args, **kwargs)
            except typer.Exit:
                raise
            except InputError as exc:
                fail(str(exc), 2)
            except (FileNotFoundError, IsADirectoryError, PermissionError, NotADirectoryError) as exc:
                name = getattr(exc, "filename", None) or ""
                fail(f"{name}: {exc.strerror or exc}", 2)
            except KeyboardInterrupt:
                fail("interrupted; no output was written", 130)
            except Exception as exc:  # noqa: BLE001 - the contract: no traceback for users
                if STATE.get("debug"):
                    traceback.print_exc(file=sys.stderr)
                fail(f"internal error: {type(exc).__name__}: {exc} ({ISSUE_HINT})", 1)
            finally:
                for w in caught:
                    if issubclass(w.category, ThermorcWarning):
                        err_console.print(f"thermorc: warning: {w.message}", markup=False)
        return result

    return wrapper
