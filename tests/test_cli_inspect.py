"""`thermorc inspect` through typer's CliRunner: exit codes, the one-line error, no output on failure."""

import json
import pathlib

import pytest
from typer.testing import CliRunner

from thermorc.cli import app

DATA = pathlib.Path(__file__).parent / "data"
runner = CliRunner()

GOOD = "time,indoor_c,heating_w,outdoor_c\n" + "".join(
    f"2024-01-10T{h:02d}:{m:02d}-05:00,{20 + 0.1 * (m // 15)},{1000 * (m == 0)},2.0\n"
    for h in range(6) for m in (0, 15, 30, 45))


def test_inspect_text_and_json(tmp_path):
    log = tmp_path / "log.csv"
    log.write_text(GOOD)
    result = runner.invoke(app, ["inspect", str(log)])
    assert result.exit_code == 0, result.output
    assert "verdict" in result.stdout and "cannot identify" in result.stdout
    result = runner.invoke(app, ["inspect", str(log), "--json", "--out", str(tmp_path / "q.json")])
    assert result.exit_code == 0
    body = json.loads(result.stdout)
    assert body["highest_order"] is None and body["source"]["rows"] == 24
    assert json.loads((tmp_path / "q.json").read_text())["coverage"] == 1.0


def test_inspect_with_column_map():
    result = runner.invoke(app, ["inspect", str(DATA / "invented_logger.csv"), "--map",
                                 str(DATA / "invented_logger_map.toml")])
    assert result.exit_code == 0, result.output
    assert "heating_w is the sum of 2 stage(s)" in result.stdout


@pytest.mark.parametrize("content, needle", [
    (GOOD.replace("20.1,0,2.0", "20.1,-5,2.0", 1), "row 3, column 'heating_w': -5 W is negative"),
    ("", "log.csv: file is empty"),
    (GOOD.replace("T00:30", "T00:05"), "row 4, column 'time'"),
])
def test_inspect_bad_log_one_line_exit_2_and_no_output(tmp_path, content, needle):
    log = tmp_path / "log.csv"
    log.write_text(content)
    out = tmp_path / "q.json"
    result = runner.invoke(app, ["inspect", str(log), "--out", str(out)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thermorc: error: ") and needle in lines[0]
    assert "Traceback" not in result.output
    assert not out.exists()


def test_inspect_directory_and_require(tmp_path):
    result = runner.invoke(app, ["inspect", str(tmp_path)])
    assert result.exit_code == 2 and "is a directory" in result.stderr
    log = tmp_path / "log.csv"
    log.write_text(GOOD)
    result = runner.invoke(app, ["inspect", str(log), "--require", "1R1C"])
    assert result.exit_code == 2 and "too little data for 1R1C" in result.stderr
