"""Robot geometry keys (DESIGN §8): parts parsed, faults named with file, key and value."""

from __future__ import annotations

import math

import pytest
from typer.testing import CliRunner

from reachgate.cli import app
from reachgate.errors import ReachgateError
from reachgate.model.geometry import Attach, Box, Capsule, LinkCapsules, Offset, Sphere
from reachgate.model.robot import load_robot

from conftest import DEMO_ROBOT, without_geometry

GOOD = without_geometry(DEMO_ROBOT.read_text())

GEOMETRY = """
[[payload]]
name = "mock-up"
box = { center_m = [0.0, 0.0, 0.30], size_m = [0.6, 0.5, 0.2], rpy_deg = [0.0, 0.0, 45.0] }

[[payload]]
name = "guard"
sphere = { center_m = [0.25, 0.0, 0.30], radius_m = 0.08 }

[[payload]]
name = "cable loop"
capsule = { from_m = [0.0, 0.0, 0.0], to_m = [0.0, 0.1, 0.2], radius_m = 0.02 }
"""


def with_geometry(text: str = GOOD, payloads: str = GEOMETRY, mount_radius: str = "0.25") -> str:
    text = text.replace("[mount]\n", f"[mount]\nradius_m = {mount_radius}\n", 1)
    text = text.replace('name = "j1"\n', 'name = "j1"\nlink_radius_m = 0.15\n', 1)
    text = text.replace('name = "j2"\n', 'name = "j2"\nlink_radius_m = 0.12\n', 1)
    text = text.replace('name = "j4"\n', 'name = "j4"\nlink_radius_m = 0.10\n', 1)
    text = text.replace('name = "j5"\n', 'name = "j5"\nlink_radius_m = 0.10\n', 1)
    return text + payloads


def load_text(tmp_path, text: str):
    path = tmp_path / "arm.toml"
    path.write_text(text)
    return load_robot(path), path


def test_robot_without_geometry_loads_and_names_every_part_missing(tmp_path):
    """Every part that has length is named; link5 (a = d = 0) adds none, so it is not."""
    robot, _ = load_text(tmp_path, GOOD)
    assert robot.parts == ()
    assert robot.geometry_missing == (
        "base", "link1", "link2", "link3", "link4", "link6", "payload"
    )  # fmt: skip


def test_geometry_keys_give_named_parts_with_rows_and_frames(tmp_path):
    robot, _ = load_text(tmp_path, with_geometry())
    by_name = {part.name: part for part in robot.parts}
    # link5 has a = d = 0: a radius but no length, so no capsule and not "missing" either
    assert list(by_name) == ["base", "link1", "link2", "link4", "mock-up", "guard", "cable loop"]
    assert robot.geometry_missing == ("link3", "link6")
    base = by_name["base"]
    assert (base.row, base.attach) == (0, Attach.BASE)
    assert base.shape == Capsule((0.0, 0.0, 0.0), (0.0, 0.0, 0.45), 0.25)
    # standard convention: d along the previous z first, then a along the new x
    assert by_name["link1"].shape == LinkCapsules(0.15, (Offset.D, Offset.A))
    assert by_name["link2"].shape == LinkCapsules(0.12, (Offset.A,))
    assert by_name["link4"].shape == LinkCapsules(0.10, (Offset.D,))
    mock = by_name["mock-up"]
    assert (mock.row, mock.attach) == (7, Attach.FLANGE)
    assert isinstance(mock.shape, Box)
    assert mock.shape.rpy_rad[2] == pytest.approx(math.radians(45.0))
    assert by_name["guard"].shape == Sphere((0.25, 0.0, 0.30), 0.08)


def test_modified_convention_walks_a_before_d(tmp_path):
    text = with_geometry().replace('convention = "standard"', 'convention = "modified"')
    robot, _ = load_text(tmp_path, text)
    by_name = {part.name: part for part in robot.parts}
    assert by_name["link1"].shape.offsets == (Offset.A, Offset.D)


@pytest.mark.parametrize(
    ("change", "fragments"),
    [
        (("radius_m = 0.25", "radius_m = 0.0"), ("mount.radius_m", "positive", "0")),
        (("link_radius_m = 0.15", "link_radius_m = -0.1"), ("joints[1].link_radius_m", "-0.1")),
        (("radius_m = 0.08", "radius_m = -0.08"), ("payload[2].sphere.radius_m", "-0.08")),
        (("size_m = [0.6, 0.5, 0.2]", "size_m = [0.6, 0.0, 0.2]"), ("payload[1].box.size_m",)),
        (("radius_m = 0.02", "radius_m = 0"), ("payload[3].capsule.radius_m",)),
        (('name = "guard"', 'name = "mock-up"'), ("payload[2].name", "used twice")),
        (('name = "guard"', 'name = "link2"'), ("payload[2].name", "link2")),
        (('name = "guard"', 'name = "a/b"'), ("payload[2].name", "'/'")),
        (("sphere = {", "plane = {"), ("payload[2]", "exactly one of sphere, capsule, box")),
        (("radius_m = 0.08 }", "radius_m = 0.08, color = 1 }"), ("payload[2].sphere.color",)),
    ],
)
def test_bad_geometry_is_refused_naming_file_key_and_value(tmp_path, change, fragments):
    path = tmp_path / "arm.toml"
    path.write_text(with_geometry().replace(*change, 1))
    with pytest.raises(ReachgateError) as info:
        load_robot(path)
    message = str(info.value)
    assert message.startswith(f"{path}: ")
    for fragment in fragments:
        assert fragment in message, message


def test_cli_refuses_bad_geometry_with_exit_code_2(tmp_path):
    path = tmp_path / "arm.toml"
    path.write_text(with_geometry(mount_radius="-0.3"))
    result = CliRunner().invoke(app, ["robot", str(path)])
    assert result.exit_code == 2
    assert "mount.radius_m" in result.output and "-0.3" in result.output
    assert "Traceback" not in result.output
