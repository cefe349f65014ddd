"""`reachgate rig`: the description of a rig and its picture at home; bad rigs exit 2."""

from __future__ import annotations

from typer.testing import CliRunner

from reachgate.cli import app

from conftest import DEMO_ROBOT, REPO

runner = CliRunner()
RIG = REPO / "rigs" / "demo_landing_rig.toml"


def test_rig_description_names_robots_bases_obstacles_and_every_pair_left_out():
    result = runner.invoke(app, ["rig", str(RIG)])
    assert result.exit_code == 0, result.output
    out = result.output
    assert "robot carrier: demo rail arm" in out and "robot table: demo pedestal arm" in out
    assert "at (7500, 1800, 0) mm, rpy (0.0, 0.0, -90.0) deg" in out
    assert "sensor mast: box at (5000, -1600, 1250) mm, size (300, 300, 2500) mm" in out
    assert "carrier.mock-up/table.pad: contact" in out
    assert "carrier.mock-up/table.bracket: ignore" in out
    assert "carrier.base/floor: closer than min_m at home" in out  # the pedestal in its trench
    checked = int(out.split("pairs checked: ")[1].split()[0])
    groups = out.split("pairs checked: ")[1].split("pairs left out")[0].splitlines()[1:]
    assert [g.split(":")[0].strip() for g in groups] == [
        "carrier against obstacles", "carrier against table", "carrier itself",
        "table against obstacles", "table itself",
    ]  # fmt: skip
    assert sum(int(line.rsplit(" ", 1)[1]) for line in groups) == checked > 100


def test_robot_file_alone_is_described_as_a_rig_of_one_without_geometry_missing_said():
    result = runner.invoke(app, ["rig", str(DEMO_ROBOT)])
    assert result.exit_code == 0, result.output
    assert "a robot file alone: one robot, no obstacles" in result.output
    assert "obstacles: none" in result.output


def test_rig_plot_writes_a_png_of_the_stated_size(tmp_path):
    picture = tmp_path / "rig.png"
    result = runner.invoke(app, ["rig", str(RIG), "--plot", str(picture)])
    assert result.exit_code == 0, result.output
    data = picture.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    assert (width, height) == (1400, 650)


def test_bad_rig_exits_2_with_one_line_naming_file_and_key(tmp_path):
    (tmp_path / "robots").mkdir()
    for robot in ("demo_rail_arm.toml", "demo_pedestal_arm.toml"):
        (tmp_path / "robots" / robot).write_text((REPO / "robots" / robot).read_text())
    (tmp_path / "rigs").mkdir()
    bad = tmp_path / "rigs" / "rig.toml"
    bad.write_text(RIG.read_text().replace("min_m = 0.05", "min_m = 0.0"))
    result = runner.invoke(app, ["rig", str(bad)])
    assert result.exit_code == 2
    assert "key clearance.min_m: must be positive, got 0.0" in result.output
    assert "Traceback" not in result.output
