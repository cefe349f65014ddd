"""Rig files (DESIGN §8): robots, bases, bodies, rails, obstacles, clearance limits; every
fault named with file, key and value (exit 2 from the command line)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from reachgate.errors import ReachgateError
from reachgate.model.geometry import Box, Plane
from reachgate.model.rig import DEFAULT_MIN_M, DEFAULT_NEAR_M, load_rig
from reachgate.model.robot import load_robot
from reachgate.model.trajectory import Scenario, Trajectory

from conftest import DEMO_ROBOT, without_geometry

ARM = without_geometry(DEMO_ROBOT.read_text())


def arm_with_geometry() -> str:
    text = ARM.replace("[mount]\n", "[mount]\nradius_m = 0.25\n", 1)
    for joint, radius in (("j1", 0.15), ("j2", 0.12), ("j4", 0.10)):
        text = text.replace(f'name = "{joint}"\n', f'name = "{joint}"\nlink_radius_m = {radius}\n')
    return (
        text
        + '\n[[payload]]\nname = "mock-up"\nsphere = { center_m = [0, 0, 0.3], radius_m = 0.2 }\n'
    )


RIG = """
name = "landing rig"

[[robots]]
name = "carrier"
file = "robots/arm.toml"
body = "drone"
rail = { policy = "follow", bandwidth_hz = 0.4 }

[[robots]]
name = "table"
file = "robots/arm.toml"
body = "pad"
base = { xyz_m = [4.5, 3.0, 0.0], rpy_deg = [0.0, 0.0, 180.0] }
rail = { policy = "fixed", at_m = 1.0 }

[[obstacles]]
name = "floor"
plane = { point_m = [0.0, 0.0, 0.0], normal = [0.0, 0.0, 2.0] }

[[obstacles]]
name = "sensor mast"
box = { center_m = [2.0, 4.0, 1.0], size_m = [0.4, 0.4, 2.0], rpy_deg = [0.0, 0.0, 30.0] }

[clearance]
min_m = 0.04
near_m = 0.12
contact = [["carrier.mock-up", "table.mock-up"]]
ignore = [["table.base", "floor"]]
"""


def write_rig(tmp_path, text: str = RIG, robot: str | None = None):
    (tmp_path / "robots").mkdir(exist_ok=True)
    (tmp_path / "robots" / "arm.toml").write_text(arm_with_geometry() if robot is None else robot)
    path = tmp_path / "rig.toml"
    path.write_text(text)
    return path


def rig_error(tmp_path, text: str, robot: str | None = None) -> str:
    with pytest.raises(ReachgateError) as caught:
        load_rig(write_rig(tmp_path, text, robot))
    return str(caught.value)


def test_rig_file_gives_robots_bases_bodies_rails_obstacles_and_limits(tmp_path):
    rig = load_rig(write_rig(tmp_path))
    assert rig.name == "landing rig" and not rig.alone
    carrier, table = rig.robots
    assert (carrier.name, carrier.body, table.name, table.body) == (
        "carrier",
        "drone",
        "table",
        "pad",
    )
    assert carrier.robot.name == "demo rail arm"
    np.testing.assert_array_equal(carrier.rig_T_cell, np.eye(4))
    # yaw 180 deg: x -> -x, y -> -y, translation as written
    expected = np.array([[-1, 0, 0, 4.5], [0, -1, 0, 3.0], [0, 0, 1, 0], [0, 0, 0, 1.0]])
    np.testing.assert_allclose(table.rig_T_cell, expected, atol=1e-15)
    assert (carrier.rail.policy, carrier.rail.bandwidth_hz, carrier.rail.at_m) == (
        "follow",
        0.4,
        None,
    )
    assert (table.rail.policy, table.rail.at_m) == ("fixed", 1.0)
    floor, mast = rig.obstacles
    assert floor.name == "floor" and floor.solid == Plane((0.0, 0.0, 0.0), (0.0, 0.0, 1.0))
    assert isinstance(mast.solid, Box) and mast.solid.size_m == (0.4, 0.4, 2.0)
    assert mast.solid.rpy_rad[2] == pytest.approx(math.radians(30.0))
    assert (rig.clearance.min_m, rig.clearance.near_m) == (0.04, 0.12)
    assert rig.clearance.contact == (("carrier.mock-up", "table.mock-up"),)
    assert rig.clearance.ignore == (("table.base", "floor"),)
    assert "carrier.link4" in rig.shape_names and "sensor mast" in rig.shape_names
    assert "carrier.link3" not in rig.shape_names  # no link_radius_m: no shape


def test_robot_file_alone_is_a_rig_of_one_robot_without_obstacles():
    rig = load_rig(DEMO_ROBOT)
    assert rig.alone and rig.obstacles == () and len(rig.robots) == 1
    assert rig.robots[0].robot.name == load_robot(DEMO_ROBOT).name
    assert (rig.clearance.min_m, rig.clearance.near_m) == (DEFAULT_MIN_M, DEFAULT_NEAR_M)


def test_bodies_come_from_the_scenario_and_a_missing_body_is_named(tmp_path):
    rig = load_rig(write_rig(tmp_path))
    t = np.array([0.0, 0.1])
    drone = Trajectory.from_arrays(t, np.zeros((2, 3)), rpy_rad=np.zeros((2, 3)))
    found = rig.bodies(Scenario.from_trajectories({"drone": drone, "pad": drone}, name="s.csv"))
    assert set(found) == {"carrier", "table"}
    with pytest.raises(ReachgateError, match=r"robot 'table' follows body 'pad'.*no body 'pad'"):
        rig.bodies(Scenario.from_trajectories({"drone": drone}, name="s.csv"))


FAULTS = [
    (
        ("bandwidth_hz = 0.4", "bandwidth_hz = 1e300"),
        "robots[1].rail.bandwidth_hz: 1e+300 Hz is not plausible",
    ),
    (("table", "carrier"), "robots[2].name: 'carrier' names two robots"),
    (
        ('file = "robots/arm.toml"\nbody = "pad"', 'file = "robots/none.toml"\nbody = "pad"'),
        "robots[2].file: 'robots/none.toml': no such file",
    ),
    (('body = "pad"', 'body = ""'), "robots[2].body: must name a scenario body"),
    (('body = "pad"\n', ""), "robots[2].body: missing"),
    (
        ("normal = [0.0, 0.0, 2.0]", "normal = [0.0, 0.0, 0.0]"),
        "obstacles[1].plane.normal: must not be zero",
    ),
    (
        ("size_m = [0.4, 0.4, 2.0]", "size_m = [0.4, 0.0, 2.0]"),
        "obstacles[2].box.size_m: every edge must be positive",
    ),
    (
        ('"table.base", "floor"', '"table.base", "roof"'),
        "clearance.ignore[1]: 'roof' is no shape of the rig",
    ),
    (
        ('"carrier.mock-up", "table.mock-up"', '"carrier.mock-up", "table.link3"'),
        "robots/arm.toml gives no geometry for link3)",
    ),
    (('"table.base", "floor"', '"floor", "floor"'), "clearance.ignore[1]: names 'floor' twice"),
    (("min_m = 0.04", "min_m = -0.04"), "clearance.min_m: must be positive, got -0.04"),
    (("near_m = 0.12", "near_m = 0.02"), "clearance.near_m: 0.02 must not be below min_m (0.04)"),
    (('policy = "fixed"', 'policy = "hold"'), "robots[2].rail.policy: must be 'fixed' or 'follow'"),
    (("at_m = 1.0", "at_m = 12.0"), "robots[2].rail.at_m: 12 is outside the rail range [0, 9]"),
    (('"sensor mast"', '"table"'), "obstacles[2].name: 'table' is also a robot's name"),
    (('"sensor mast"', '"floor"'), "obstacles[2].name: 'floor' names two obstacles"),
    (
        ('name = "carrier"', 'name = "car.rier"'),
        "robots[1].name: must be a non-empty name without '.'",
    ),
    (("[clearance]", "[clearance]\nspare = 1"), "clearance.spare: unknown key"),
    (("base = {", "bass = {"), "robots[2].bass: unknown key"),
]


@pytest.mark.parametrize(("edit", "expected"), FAULTS)
def test_rig_faults_name_file_key_and_value(tmp_path, edit, expected):
    old, new = edit
    assert old in RIG
    message = rig_error(tmp_path, RIG.replace(old, new, 1))
    assert message.startswith(str(tmp_path / "rig.toml") + ": key "), message
    assert expected in message, message


def test_rail_table_for_a_robot_without_rail_is_refused(tmp_path):
    no_rail = arm_with_geometry()
    start, end = no_rail.index("[rail]"), no_rail.index("[mount]")
    message = rig_error(tmp_path, RIG, robot=no_rail[:start] + no_rail[end:])
    assert "key robots[1].rail: robot file" in message and "has no rail" in message


def test_a_fault_in_a_robot_file_names_that_file(tmp_path):
    message = rig_error(
        tmp_path, RIG, robot=arm_with_geometry().replace("vmax_m_s = 1.6", "vmax_m_s = -1.6")
    )
    assert message.startswith(str(tmp_path / "robots" / "arm.toml") + ": key rail.vmax_m_s")


def test_a_rig_without_robots_is_refused(tmp_path):
    assert "key robots: needs at least one [[robots]] table" in rig_error(
        tmp_path, 'name = "empty"\n'
    )
