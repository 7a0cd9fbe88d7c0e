"""``thermorc biot``: exit codes, the one-line error contract, atomic output (typer testing docs)."""

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from thermorc.cli import app
from thermorc.construction import analyse_construction, read_construction

DATA = Path(__file__).parent / "data"
MARROWBY = DATA / "construction_marrowby.toml"

runner = CliRunner()


def test_biot_writes_the_report_and_prints_a_table(tmp_path):
    out = tmp_path / "biot.json"
    result = runner.invoke(app, ["biot", str(MARROWBY), "--out", str(out)])
    assert result.exit_code == 0, result.output
    report = json.loads(out.read_text(encoding="utf-8"))
    names = [e["name"] for e in report["elements"]]
    assert names == ["external walls", "roof", "ground floor", "windows", "partitions", "intermediate floor slab"]
    for e in report["elements"]:
        for key in ("name", "biot", "lumped_ok", "u_value_w_m2k", "areal_capacity_j_m2k"):
            assert key in e
    # The file holds what the library computes (the CLI adds no physics).
    expected = analyse_construction(read_construction(MARROWBY))
    assert report["whole_home"]["ua_w_per_k"] == pytest.approx(expected["whole_home"]["ua_w_per_k"])
    assert report["whole_home"]["air_leakage_w_per_k"] == pytest.approx(1200 * 0.5 * 250 / 3600)
    assert report["iso13790"]["time_constant_h"] > 0
    assert "Construction UA" in result.stdout
    assert "intermediate floor slab" in result.stdout
    assert "licensed professional" in result.stdout


def test_json_flag_prints_the_same_json(tmp_path):
    out = tmp_path / "biot.json"
    result = runner.invoke(app, ["biot", str(MARROWBY), "--out", str(out), "--json"])
    assert result.exit_code == 0
    assert json.loads(result.stdout) == json.loads(out.read_text(encoding="utf-8"))


def test_interval_option_changes_the_one_node_verdict(tmp_path):
    out = tmp_path / "biot.json"
    # Timber cabin: the mass follows the air in about 0.6 h, so a 15-min log needs 2 nodes.
    runner.invoke(app, ["biot", str(DATA / "construction_timber.toml"), "--out", str(out)])
    assert json.loads(out.read_text())["recommendation"]["preset"] == "1R1C"
    runner.invoke(app, ["biot", str(DATA / "construction_timber.toml"), "--out", str(out), "--interval-min", "15"])
    assert json.loads(out.read_text())["recommendation"]["preset"] != "1R1C"


@pytest.mark.parametrize(
    "old, new, needle",
    [
        ("thickness_m = 0.10\n  material = \"concrete_medium_2000\"", "thickness_m = -0.10\n  material = \"concrete_medium_2000\"",
         "column 'elements[0].layers[1].thickness_m': -0.1 is not positive"),
        ("material = \"mineral_wool\"", "material = \"mineral_wol\"", "near names: mineral_wool"),
        ("ach = 0.5", "ach = \"half\"", "column 'air_leakage.ach'"),
        ("floor_area_m2 = 100.0", "floor_area_m2 = = 100.0", "row 4: not valid TOML"),  # line 4 of the file
    ],
)
def test_bad_construction_is_one_line_exit_2_and_no_output(tmp_path, old, new, needle):
    text = MARROWBY.read_text(encoding="utf-8")
    assert old in text
    bad = tmp_path / "bad_home.toml"
    bad.write_text(text.replace(old, new, 1), encoding="utf-8")
    out = tmp_path / "biot.json"
    result = runner.invoke(app, ["biot", str(bad), "--out", str(out)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1
    assert lines[0].startswith("thermorc: error: bad_home.toml")
    assert needle in lines[0]
    assert not out.exists()
    assert list(tmp_path.iterdir()) == [bad]  # no temporary file left behind either


def test_missing_file_is_a_usage_error(tmp_path):
    result = runner.invoke(app, ["biot", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "b.json")])
    assert result.exit_code == 2
    assert not (tmp_path / "b.json").exists()
