"""A rig: several robots, the bodies they carry and the cell around them (DESIGN §8).

A rig file (TOML) names each robot (the prefix of its axes and shapes in reports), the robot
file that describes it (relative to the rig file), the scenario body its TCP follows, where
its cell frame sits in the rig frame, and optionally its rail policy; then fixed obstacles
in the rig frame and the clearance limits. A robot file alone is a rig of one robot with no
obstacles. Every key is validated like a robot file's: one message naming file, key, value.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.geometry import Obstacle
from reachgate.model.robot import (
    OBSTACLE_SOLIDS,
    Robot,
    _pose,
    _Table,
    load_robot,
    parse_toml_bytes,
    read_toml,
    robot_from_dict,
    shape_name,
    solid_from_table,
)
from reachgate.model.trajectory import PLAIN_BODY, Scenario, Trajectory

#: Clearance limits when the rig file gives none, m (ours, documented in README): a hand's
#: width of room as the violation line, three times that as the near band.
DEFAULT_MIN_M = 0.05
DEFAULT_NEAR_M = 0.15
#: Rail policies a rig file may name (checking/rail.py's RailPolicy values).
RAIL_POLICIES = ("fixed", "follow")
#: Rig name of the one robot of a robot file given alone.
LONE_ROBOT_NAME = "robot"


@dataclass(frozen=True)
class RailDefault:
    """A robot's rail choice from the rig file, used unless the command line gives one.

    policy: "fixed" or "follow"; at_m: the fixed position (None: the rail's home);
    bandwidth_hz: the follow bandwidth (None: the program's default).
    """

    policy: str
    at_m: float | None = None
    bandwidth_hz: float | None = None


@dataclass(frozen=True, eq=False)
class RigRobot:
    """One robot of a rig.

    name: its rig name (prefix of its axes `name.j4` and shapes `name.link3`); body: the
    scenario body its TCP follows (PLAIN_BODY for a robot file alone); rig_T_cell: (4, 4) the
    robot file's cell frame in the rig frame; rail: the rig file's rail choice, if any.
    """

    name: str
    robot: Robot
    body: str
    rig_T_cell: np.ndarray
    rail: RailDefault | None = None


@dataclass(frozen=True)
class ClearanceLimits:
    """Clearance limits of a rig (DESIGN §9), m; pairs as (shape name, shape name)."""

    min_m: float = DEFAULT_MIN_M
    near_m: float = DEFAULT_NEAR_M
    contact: tuple[tuple[str, str], ...] = ()
    ignore: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True, eq=False)
class Rig:
    """A validated rig: robots, fixed obstacles (rig frame), clearance limits.

    alone: True for a robot file given where a rig is expected (one robot, no obstacles).
    """

    name: str
    robots: tuple[RigRobot, ...]
    obstacles: tuple[Obstacle, ...] = ()
    clearance: ClearanceLimits = field(default_factory=ClearanceLimits)
    source: str = "<arrays>"
    alone: bool = False

    def robot(self, name: str) -> RigRobot:
        for placed in self.robots:
            if placed.name == name:
                return placed
        names = ", ".join(r.name for r in self.robots)
        raise ReachgateError(f"{self.source}: no robot {name!r} in the rig (it has {names})")

    @property
    def shape_names(self) -> tuple[str, ...]:
        """Every shape with geometry: `robot.part` for each robot's parts, then obstacles."""
        return tuple(f"{r.name}.{p.name}" for r in self.robots for p in r.robot.parts) + tuple(
            o.name for o in self.obstacles
        )

    def bodies(self, scenario: Scenario) -> dict[str, Trajectory]:
        """Each robot's trajectory in the scenario: robot name -> Trajectory. A rig of one robot
        also takes plain columns. Raises ReachgateError naming the rig, robot and body."""
        only_one = len(self.robots) == 1
        found = {}
        for placed in self.robots:
            try:
                found[placed.name] = scenario.body(placed.body, only_one=only_one)
            except ReachgateError as error:
                raise ReachgateError(
                    f"{self.source}: robot {placed.name!r} follows body {placed.body!r}: {error}"
                ) from None
        return found


def rig_of_one(robot: Robot) -> Rig:
    """A robot alone as a rig: one robot in the rig frame, following the plain columns."""
    placed = RigRobot(name=LONE_ROBOT_NAME, robot=robot, body=PLAIN_BODY, rig_T_cell=np.eye(4))
    return Rig(name=robot.name, robots=(placed,), source=robot.source, alone=True)


def is_rig_data(data: dict[str, Any]) -> bool:
    """True for a parsed rig file (it has [[robots]]), False for a robot file."""
    return "robots" in data or "joints" not in data


def load_rig(path: str | Path) -> Rig:
    """Load and validate a rig file, or a robot file as a rig of one robot (DESIGN §8).

    Raises ReachgateError naming file, key and value.
    """
    path = Path(path)
    data = read_toml(path, "rig or robot")
    if not is_rig_data(data):
        return rig_of_one(robot_from_dict(data, source=str(path)))
    return rig_from_dict(data, source=str(path), folder=path.parent)


def rig_from_dict(
    data: dict[str, Any],
    source: str = "<dict>",
    folder: Path = Path(),
    robot_files: dict[str, bytes] | None = None,
) -> Rig:
    """Validate a parsed rig file; robot files are read relative to `folder`, or taken from
    robot_files (path as the rig names it, relative to `folder` -> the file's bytes: how a
    scan's workers rebuild the rig its parent read)."""
    top = _Table(data, source, "")
    name = top.text("name", default=Path(source).stem)
    listed = top.get("robots", default=None)
    if not isinstance(listed, list) or not listed:
        raise top.fail("robots", "needs at least one [[robots]] table")
    robots: list[RigRobot] = []
    for i, item in enumerate(listed):
        table = _Table(item, source, f"robots[{i + 1}]")
        placed = _rig_robot(table, folder, robot_files)
        if placed.name in (r.name for r in robots):
            raise table.fail("name", f"{placed.name!r} names two robots")
        robots.append(placed)

    obstacles: list[Obstacle] = []
    listed = top.get("obstacles", default=[])
    if not isinstance(listed, list):
        raise top.fail("obstacles", "must be [[obstacles]] tables")
    for i, item in enumerate(listed):
        table = _Table(item, source, f"obstacles[{i + 1}]")
        obstacle_name = shape_name(table)
        if obstacle_name in (o.name for o in obstacles):
            raise table.fail("name", f"{obstacle_name!r} names two obstacles")
        if obstacle_name in (r.name for r in robots):
            raise table.fail("name", f"{obstacle_name!r} is also a robot's name")
        obstacles.append(Obstacle(obstacle_name, solid_from_table(table, OBSTACLE_SOLIDS)))
        table.reject_unknown()

    rig = Rig(name=name, robots=tuple(robots), obstacles=tuple(obstacles), source=source)
    rig = replace(rig, clearance=_clearance(top.table("clearance", optional=True), rig))
    top.reject_unknown()
    return rig


def _rig_robot(table: _Table, folder: Path, robot_files: dict[str, bytes] | None) -> RigRobot:
    name = shape_name(table)
    file = table.text("file")
    robot_path = folder / file
    if robot_files is not None:
        if str(robot_path) not in robot_files:
            raise table.fail("file", f"{file!r}: not among the robot files given ({robot_path})")
        data = parse_toml_bytes(robot_files[str(robot_path)], str(robot_path), "robot")
        robot = robot_from_dict(data, source=str(robot_path))
    elif not robot_path.is_file():
        what = "is a folder" if robot_path.is_dir() else "no such file"
        raise table.fail("file", f"{file!r}: {what} ({robot_path}; relative to the rig file)")
    else:
        robot = load_robot(robot_path)
    body = table.text("body")
    if not body.strip():
        raise table.fail("body", "must name a scenario body, got an empty name")
    base = table.get("base", default=None)
    rig_T_cell = np.eye(4) if base is None else _pose(_Table(base, table.file, table.key("base")))
    rail_table = table.table("rail", optional=True)
    rail = None if rail_table is None else _rail_default(rail_table, robot)
    table.reject_unknown()
    return RigRobot(name=name, robot=robot, body=body, rig_T_cell=rig_T_cell, rail=rail)


def _rail_default(table: _Table, robot: Robot) -> RailDefault:
    if robot.rail is None:
        raise ReachgateError(
            f"{table.file}: key {table.path}: robot file {robot.source} has no rail"
        )
    policy = table.text("policy")
    if policy not in RAIL_POLICIES:
        raise table.fail("policy", f"must be 'fixed' or 'follow', got {policy!r}")
    at_m = table.number("at_m", default=None)
    bandwidth_hz = table.number("bandwidth_hz", default=None, positive=True)
    if at_m is not None:
        if policy != "fixed":
            raise table.fail("at_m", "is the position of a fixed rail; policy is 'follow'")
        lower, upper = robot.rail.lower, robot.rail.upper
        if not lower <= at_m <= upper:
            raise table.fail("at_m", f"{at_m:g} is outside the rail range [{lower:g}, {upper:g}]")
    if bandwidth_hz is not None and policy != "follow":
        raise table.fail("bandwidth_hz", "is the bandwidth of a following rail; policy is 'fixed'")
    table.reject_unknown()
    return RailDefault(policy, at_m, bandwidth_hz)


def _clearance(table: _Table | None, rig: Rig) -> ClearanceLimits:
    if table is None:
        return ClearanceLimits()
    min_m = table.number("min_m", default=DEFAULT_MIN_M, positive=True)
    near_m = table.number("near_m", default=max(DEFAULT_NEAR_M, min_m), positive=True)
    if near_m < min_m:
        raise table.fail("near_m", f"{near_m:g} must not be below min_m ({min_m:g})")
    known = set(rig.shape_names)
    pairs = {key: _pairs(table, key, known, rig) for key in ("contact", "ignore")}
    table.reject_unknown()
    return ClearanceLimits(min_m, near_m, pairs["contact"], pairs["ignore"])


def _pairs(table: _Table, key: str, known: set[str], rig: Rig) -> tuple[tuple[str, str], ...]:
    """A list of [shape, shape] pairs, each naming two different shapes with geometry."""
    value = table.get(key, default=[])
    if not isinstance(value, list):
        raise table.fail(key, f"must be a list of [shape, shape] pairs, got {value!r}")
    pairs = []
    for k, pair in enumerate(value):
        where = f"{key}[{k + 1}]"
        if (
            not isinstance(pair, list)
            or len(pair) != 2
            or not all(isinstance(n, str) for n in pair)
        ):
            raise table.fail(where, f"must be a pair of shape names, got {pair!r}")
        if pair[0] == pair[1]:
            raise table.fail(where, f"names {pair[0]!r} twice; a pair needs two shapes")
        for shape in pair:
            if shape not in known:
                raise table.fail(where, f"{shape!r} is no shape of the rig ({_why(shape, rig)})")
        pairs.append((pair[0], pair[1]))
    return tuple(pairs)


def _why(shape: str, rig: Rig) -> str:
    """Why a shape name is unknown, for the message."""
    robot_name, _, part = shape.partition(".")
    robots = {r.name: r.robot for r in rig.robots}
    if robot_name in robots and part:
        robot = robots[robot_name]
        if part in robot.geometry_missing:
            return f"{robot.source} gives no geometry for {part}"
        have = ", ".join(p.name for p in robot.parts) or "none"
        return f"robot {robot_name!r} has the shapes {have}"
    obstacles = ", ".join(o.name for o in rig.obstacles) or "none"
    return f"shapes are robot.part ({', '.join(robots)}) or obstacles ({obstacles})"
