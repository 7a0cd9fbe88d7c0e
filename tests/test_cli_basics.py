"""The command line's own contract: version, help, and exit codes (typer testing docs)."""

import subprocess
import sys

import pytest
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


@pytest.mark.parametrize("args, words", [
    (["calibrate", "no-such-log.csv", "--out", "R.json"], "file 'no-such-log.csv' does not exist"),
    (["calibrate", "--out", "R.json"], "Missing argument 'log'"),
    (["calibrate", "weather_demo/log.csv", "--model", "9R9C", "--out", "R.json"], "'9R9C' is not one of"),
    (["calibrate", "weather_demo/log.csv", "--colour", "red"], "No such option: --colour"),
    (["no-such-command"], "No such command 'no-such-command'"),
])
def test_usage_errors_of_the_installed_command_are_one_line(args, words, tmp_path):
    # The console script, as a user runs it: a usage error is one line on stderr naming what
    # is wrong, exit 2, no traceback and no box, like any other bad input; nothing is written.
    import pathlib
    import shutil

    root = pathlib.Path(__file__).resolve().parent.parent
    shutil.copytree(root / "weather_demo", tmp_path / "weather_demo")
    proc = subprocess.run([sys.executable, "-m", "thermorc", *args], capture_output=True, text=True, cwd=tmp_path)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: ") and words in lines[0], proc.stderr
    assert "--help" in lines[0] and "Traceback" not in proc.stderr
    assert not (tmp_path / "R.json").exists()


def test_the_bare_command_still_shows_its_help():
    proc = subprocess.run([sys.executable, "-m", "thermorc"], capture_output=True, text=True)
    assert proc.returncode == 2
    shown = proc.stdout + proc.stderr
    assert "Usage:" in shown and "COMMAND" in shown and "calibrate" in shown
