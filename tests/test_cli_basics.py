"""The command line's own contract: version, help, and exit codes (typer testing docs)."""

import subprocess
import sys

from typer.testing import CliRunner

from thermorc import __version__
from thermorc.cli import app

runner = CliRunner()


def test_version_flag_prints_package_version():
    result = runner.invoke(app, ["--version"])
    assert result.exit_code == 0
    assert result.stdout.strip() == f"thermorc {__version__}"


def test_unknown_command_is_a_usage_error_with_exit_2():
    # Typer/click exit 2 on usage errors (typer docs, "Terminating"); our contract matches it.
    result = runner.invoke(app, ["no-such-command"])
    assert result.exit_code == 2


def test_module_entry_point_runs():
    proc = subprocess.run([sys.executable, "-m", "thermorc", "--version"], capture_output=True, text=True)
    assert proc.returncode == 0
    assert proc.stdout.startswith("thermorc ")
