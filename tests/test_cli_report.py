"""``thermorc report``: bad input gives one line, exit 2 and no output (typer testing docs)."""

from pathlib import Path

import pytest
from typer.testing import CliRunner

from thermorc.cli import app

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "weather_demo"

runner = CliRunner()


def _home(tmp_path, text):
    path = tmp_path / "home.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize("text, month, expect", [
    ('name = "x"\n[log]\nfile = "missing.csv"\n', "2023-02", "home.toml, column 'log.file': 'missing.csv': no such file"),
    ('name = "x"\nlog = \n', "2023-02", "home.toml, row 2: invalid TOML"),
    (f'colour = "red"\n[log]\nfile = "{DEMO / "log.csv"}"\n', "2023-02", "column 'colour': unknown key"),
    (f'[log]\nfile = "{DEMO / "log.csv"}"\n[model]\npreset = "5R5C"\n', "2023-02", "column 'model.preset'"),
    (f'[log]\nfile = "{DEMO / "log.csv"}"\ntz = "America/Chicago"\n', "2023-13", "--month is '2023-13'"),
    (f'[log]\nfile = "{DEMO / "log.csv"}"\ntz = "America/Chicago"\n[weather]\nfile = "{DEMO / "weather.csv"}"\n',
     "2024-06", "month 2024-06 is not in the log"),
])
def test_bad_home_file_one_line_exit_2_no_output(tmp_path, text, month, expect):
    home = _home(tmp_path, text)
    out = tmp_path / "out"
    result = runner.invoke(app, ["report", str(home), "--month", month, "--out", str(out), "--quiet"])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: ")
    assert expect in lines[0]
    assert "Traceback" not in result.output
    assert not out.exists()


def test_missing_month_is_a_usage_error(tmp_path):
    home = _home(tmp_path, f'[log]\nfile = "{DEMO / "log.csv"}"\n')
    result = runner.invoke(app, ["report", str(home), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2
    assert not (tmp_path / "out").exists()


def test_help_has_an_example():
    result = runner.invoke(app, ["report", "--help"])
    assert result.exit_code == 0 and "thermorc report" in result.stdout and "--month" in result.stdout
