"""docs/reference.md is the one place for every key, column, option and exit code: every key
the loaders read and every option of the documented commands must appear there."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest
import typer.main

from reachgate import cli
from reachgate.model import robot as robot_module
from reachgate.model import trajectory as trajectory_module
from reachgate.model.robot import robot_from_dict

from conftest import REPO

REFERENCE = REPO / "docs" / "reference.md"
DOCUMENTED_COMMANDS = ("check", "scan", "perturb", "envelope", "robot", "rig", "delay", "place")


def reference_text() -> str:
    return REFERENCE.read_text(encoding="utf-8")


def mentioned(name: str, text: str) -> bool:
    return re.search(rf"(?<![\w.-]){re.escape(name)}(?![\w-])", text) is not None


def a_robot_of_every_kind() -> dict:
    """Every table and both joint kinds, so that every key the loader asks for is asked."""
    revolute = dict(
        name="j1",
        a_m=0.3,
        alpha_deg=-90.0,
        d_m=0.7,
        range_deg=[-90, 90],
        vmax_deg_s=100.0,
        amax_deg_s2=300.0,
        jmax_deg_s3=3000.0,
        link_radius_m=0.1,
    )
    prismatic = dict(
        name="slide",
        type="prismatic",
        a_m=0.0,
        alpha_deg=0.0,
        offset_m=0.1,
        theta_deg=0.0,
        range_m=[0.0, 0.5],
        vmax_m_s=0.5,
        amax_m_s2=1.0,
    )
    return dict(
        name="every key", convention="modified",
        rail=dict(frame=dict(xyz_m=[0, 0, 0]), range_m=[0, 5], vmax_m_s=1.0, amax_m_s2=2.0),
        mount=dict(xyz_m=[0, 0, 0.4], radius_m=0.2), tool=dict(rpy_deg=[0, 0, 0]),
        joints=[revolute, prismatic], thresholds=dict(wrist_min_deg=4.0),
        payload=[dict(name="ball", sphere=dict(center_m=[0, 0, 0.1], radius_m=0.05)),
                 dict(name="rod", capsule=dict(from_m=[0, 0, 0], to_m=[0, 0, 0.2], radius_m=0.02)),
                 dict(name="crate", box=dict(center_m=[0, 0, 0.1], size_m=[0.1, 0.1, 0.1]))],
    )  # fmt: skip


def test_every_key_the_robot_loader_reads_is_in_the_reference(monkeypatch, demo_robot_path):
    asked: set[str] = set()
    original = robot_module._Table.get

    def recording_get(self, name, default=...):
        asked.add(name)
        return original(self, name, default)

    monkeypatch.setattr(robot_module._Table, "get", recording_get)
    robot_from_dict(a_robot_of_every_kind(), source="every key")
    for path in sorted((REPO / "robots").glob("*.toml")):
        robot_from_dict(tomllib.loads(path.read_text()), source=str(path))
    declared = {*robot_module.TOP_KEYS, *robot_module.RAIL_KEYS, *robot_module.POSE_KEYS,
                *robot_module.THRESHOLD_KEYS, *(k for keys in robot_module.JOINT_KEYS.values()
                                                for k in keys)}  # fmt: skip
    assert asked >= {"range_deg", "range_m", "link_radius_m", "center_m", "from_m", "size_m"}
    text = reference_text()
    missing = sorted(k for k in asked | declared if not mentioned(k, text))
    assert not missing, f"robot keys missing from docs/reference.md: {missing}"


def test_every_trajectory_column_is_in_the_reference():
    t = trajectory_module
    columns = {t._TIME_COLUMN, *t._QUAT_COLUMNS}
    columns |= {f"{a}_{u}" for a in t._AXES for u in t._LENGTH_UNITS}
    columns |= {f"{a}_{u}" for a in t._ANGLES for u in t._ANGLE_UNITS}
    text = reference_text()
    assert not sorted(c for c in columns if not mentioned(c, text))
    from reachgate.model.columnar import COLUMNAR_SUFFIXES

    assert all(f"`{suffix}`" in text for suffix in COLUMNAR_SUFFIXES)


@pytest.mark.parametrize("command", DOCUMENTED_COMMANDS)
def test_every_option_of_the_command_is_in_the_reference(command):
    group = typer.main.get_command(cli.app)
    text = reference_text()
    section = text.split(f"### `reachgate {command}", 1)[1].split("\n### ", 1)[0]
    shared = text.split("### `reachgate check", 1)[1].split("\n### ", 1)[0]
    shared += text.split("### `reachgate scan", 1)[1].split("\n### ", 1)[0]
    options = [o for p in group.commands[command].params for o in p.opts if o.startswith("--")]
    missing = [o for o in options if not (mentioned(o, section) or mentioned(o, shared))]
    assert not missing, f"{command}: options missing from docs/reference.md: {missing}"


def test_every_exit_code_is_in_the_reference_and_the_readme_links_it():
    codes = {cli.EXIT_PASS, cli.EXIT_FAIL, cli.EXIT_BAD_INPUT, cli.EXIT_CLUSTER_LOST,
             cli.EXIT_INTERRUPTED}  # fmt: skip
    table = reference_text().split("## Exit codes", 1)[1]
    assert all(re.search(rf"^\| {code} \|", table, re.MULTILINE) for code in codes)
    assert "docs/reference.md" in (REPO / "README.md").read_text(encoding="utf-8")
    assert Path(REFERENCE).is_file()
