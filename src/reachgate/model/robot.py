"""Robot description: load and validate a robot TOML file into a Robot value (DESIGN §3).

Inside the Robot everything is SI (m, rad, s). The arm's DH table is kept in one canonical
form, the standard (distal) convention, plus a constant prefix transform: a modified (Craig)
table converts exactly, because Rx(α)·Tx(a) commutes and regroups into standard links.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass
from enum import Enum
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.geometry import (
    Attach,
    Box,
    Capsule,
    LinkCapsules,
    Offset,
    Part,
    Plane,
    Solid,
    Sphere,
)
from reachgate.model.transforms import transform_from_xyz_rpy


class Convention(Enum):
    """Denavit–Hartenberg convention of a robot file."""

    STANDARD = "standard"
    MODIFIED = "modified"


class JointKind(Enum):
    REVOLUTE = "revolute"
    PRISMATIC = "prismatic"


@dataclass(frozen=True)
class Axis:
    """Limits of one moving axis (the rail or an arm joint), SI: rad or m, per s, s², s³.

    jmax_per_s3 is None where the file gives no jerk limit.
    """

    name: str
    kind: JointKind
    lower: float
    upper: float
    vmax_per_s: float
    amax_per_s2: float
    jmax_per_s3: float | None
    home: float

    @property
    def is_revolute(self) -> bool:
        return self.kind is JointKind.REVOLUTE


@dataclass(frozen=True)
class DHRow:
    """One row of the DH table as written in the file, SI.

    For a revolute joint theta = q + theta_offset_rad, d = d_m. For a prismatic joint
    d = q + d_m (the file's offset_m) and theta = theta_offset_rad (the file's theta_deg).
    """

    a_m: float
    alpha_rad: float
    d_m: float
    theta_offset_rad: float


@dataclass(frozen=True)
class Thresholds:
    """Warning bands and singularity floors (DESIGN §3); defaults are documented in README."""

    position_margin_rad: float = math.radians(2.0)
    position_margin_m: float = 0.010
    rate_margin_fraction: float = 0.10
    wrist_min_rad: float = math.radians(5.0)
    elbow_min_rad: float = math.radians(5.0)
    shoulder_min_m: float = 0.05
    manipulability_min: float = 0.0
    #: General arms: floor of the scale-free measure of kinematics/singularity.py, calibrated
    #: to fire where wrist_min_deg fires (scripts/calibrate_conditioning.py; README).
    conditioning_min: float = 0.0425


@dataclass(frozen=True)
class Chain:
    """The arm's DH chain in canonical standard form, arrays of shape (n,).

    base_T_chain: (4, 4) constant prefix (identity for a standard file).
    Link i: A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i) with theta_i = q_i + theta_offset_i for
    revolute joints and d_i = q_i + d_i for prismatic joints.
    """

    a_m: np.ndarray
    alpha_rad: np.ndarray
    d_m: np.ndarray
    theta_offset_rad: np.ndarray
    revolute: np.ndarray
    base_T_chain: np.ndarray

    @property
    def n(self) -> int:
        return int(self.a_m.size)


@dataclass(frozen=True, eq=False)
class Robot:
    """A validated robot: DH rows, joint and rail limits, mount, tool, thresholds, geometry.

    Axis order everywhere (arrays of shape (..., n_axes)): the rail first if there is one,
    then the arm joints base to flange. `parts` are the shapes the file gives (DESIGN §8);
    `geometry_missing` names the parts it gives none for ("base", "link3", "payload"), which
    clearance cannot check.
    """

    name: str
    convention: Convention
    rows: tuple[DHRow, ...]
    joints: tuple[Axis, ...]
    rail: Axis | None
    cell_T_rail: np.ndarray
    carriage_T_base: np.ndarray
    flange_T_tool: np.ndarray
    thresholds: Thresholds
    source: str = "<arrays>"
    parts: tuple[Part, ...] = ()
    geometry_missing: tuple[str, ...] = ()
    #: False when the file gave no [tool]: the TCP is then the flange itself, which a check
    #: of a real mock-up rarely means (the report says so).
    has_tool: bool = True

    @cached_property
    def axes(self) -> tuple[Axis, ...]:
        return ((self.rail,) if self.rail is not None else ()) + self.joints

    @property
    def axis_names(self) -> tuple[str, ...]:
        return tuple(axis.name for axis in self.axes)

    @property
    def n_axes(self) -> int:
        return len(self.axes)

    @property
    def has_rail(self) -> bool:
        return self.rail is not None

    @cached_property
    def lower(self) -> np.ndarray:
        return np.array([axis.lower for axis in self.axes])

    @cached_property
    def upper(self) -> np.ndarray:
        return np.array([axis.upper for axis in self.axes])

    @cached_property
    def vmax(self) -> np.ndarray:
        return np.array([axis.vmax_per_s for axis in self.axes])

    @cached_property
    def amax(self) -> np.ndarray:
        return np.array([axis.amax_per_s2 for axis in self.axes])

    @cached_property
    def jmax(self) -> np.ndarray:
        """Jerk limits (n_axes,), NaN where none is given."""
        return np.array([np.nan if a.jmax_per_s3 is None else a.jmax_per_s3 for a in self.axes])

    @cached_property
    def home(self) -> np.ndarray:
        return np.array([axis.home for axis in self.axes])

    @cached_property
    def revolute(self) -> np.ndarray:
        return np.array([axis.is_revolute for axis in self.axes])

    @cached_property
    def chain(self) -> Chain:
        return _canonical_chain(self.convention, self.rows, self.joints)


def _canonical_chain(
    convention: Convention, rows: tuple[DHRow, ...], joints: tuple[Axis, ...]
) -> Chain:
    a = np.array([r.a_m for r in rows])
    alpha = np.array([r.alpha_rad for r in rows])
    d = np.array([r.d_m for r in rows])
    theta = np.array([r.theta_offset_rad for r in rows])
    revolute = np.array([j.is_revolute for j in joints])
    base_T_chain = np.eye(4)
    if convention is Convention.MODIFIED:
        # Craig row i holds (alpha_{i-1}, a_{i-1}, theta_i, d_i): the first row's alpha and a
        # become a constant prefix, the others shift one link down, the last link gets 0, 0.
        base_T_chain = _rot_x_trans_x(alpha[0], a[0])
        a = np.append(a[1:], 0.0)
        alpha = np.append(alpha[1:], 0.0)
    return Chain(a, alpha, d, theta, revolute, base_T_chain)


def _rot_x_trans_x(alpha: float, a: float) -> np.ndarray:
    c, s = math.cos(alpha), math.sin(alpha)
    return np.array([[1, 0, 0, a], [0, c, -s, 0], [0, s, c, 0], [0, 0, 0, 1.0]])


# --- loading -------------------------------------------------------------------------------


@dataclass(frozen=True)
class PlausibleBound:
    """The magnitudes a value of one unit may take in a robot cell; others are refused as
    typing errors. lowest: the smallest positive value of a limit (0: no floor)."""

    lowest: float
    highest: float
    why: str


#: Plausible bounds by the unit suffix of a key (common practice: the spec sheets of
#: industrial arms, rails and gantries fall well inside them; they are our choice, not a
#: standard). They catch 1e300 or a limit of 1e-9, never a real cell.
PLAUSIBLE = {
    "m": PlausibleBound(0.0, 100.0, "long rails and gantries run to a few tens of metres"),
    "mm": PlausibleBound(0.0, 1e5, "long rails and gantries run to a few tens of metres"),
    "deg": PlausibleBound(0.0, 3600.0, "ten turns; even endless axes are given a few turns"),
    "deg_s": PlausibleBound(0.01, 1e4, "industrial joints run at about 1 to 1000 deg/s"),
    "deg_s2": PlausibleBound(0.01, 1e6, "industrial joints accelerate at about 10 to 10^5 deg/s^2"),
    "deg_s3": PlausibleBound(0.01, 1e8, "joint jerk limits lie about 10 to 100 times the accel"),
    "m_s": PlausibleBound(1e-4, 100.0, "rails and linear axes run at about 0.01 to 10 m/s"),
    "m_s2": PlausibleBound(1e-4, 1e3, "rails and linear axes accelerate at about 0.1 to 100 m/s^2"),
    "m_s3": PlausibleBound(1e-4, 1e5, "linear jerk limits lie about 10 to 100 times the accel"),
    "hz": PlausibleBound(
        1e-3, 1e3, "a carriage's follow loop runs at a few Hz; 1 mHz would not move in an hour"
    ),
}


def _unit_suffix(key: str) -> str | None:
    """The PLAUSIBLE unit a key ends in (vmax_deg_s -> deg_s, a_m -> m), else None."""
    for unit in sorted(PLAUSIBLE, key=len, reverse=True):
        if key.endswith("_" + unit):
            return unit
    return None


#: Keys each table accepts, for messages (the loader below reads exactly these).
POSE_KEYS = ("xyz_m", "rpy_deg")


def _axis_keys(unit: str) -> tuple[str, ...]:
    return (f"range_{unit}", f"vmax_{unit}_s", f"amax_{unit}_s2", f"jmax_{unit}_s3", f"home_{unit}")


RAIL_KEYS = ("frame", *_axis_keys("m"))
JOINT_KEYS = {
    "revolute": ("name", "type", "a_m", "alpha_deg", "d_m", "offset_deg", *_axis_keys("deg"),
                 "link_radius_m"),
    "prismatic": ("name", "type", "a_m", "alpha_deg", "offset_m", "theta_deg", *_axis_keys("m"),
                  "link_radius_m"),
}  # fmt: skip
THRESHOLD_KEYS = (
    "position_margin_deg",
    "position_margin_mm",
    "rate_margin_fraction",
    "wrist_min_deg",
    "elbow_min_deg",
    "shoulder_min_m",
    "manipulability_min",
    "conditioning_min",
)
TOP_KEYS = ("name", "convention", "rail", "mount", "joints", "tool", "thresholds", "payload")


class _Table:
    """A TOML table with the file name and key path, for messages that say where a fault is."""

    def __init__(self, data: Any, file: str, path: str, must_exist: bool = True) -> None:
        if not isinstance(data, dict):
            raise ReachgateError(f"{file}: {path or 'top level'} must be a table, got {data!r}")
        self.data, self.file, self.path = data, file, path
        self.used: set[str] = set()
        self.accepted: tuple[str, ...] = ()

    def key(self, name: str) -> str:
        return f"{self.path}.{name}" if self.path else name

    def fail(self, name: str, message: str) -> ReachgateError:
        return ReachgateError(f"{self.file}: key {self.key(name)}: {message}")

    def get(self, name: str, default: Any = ...) -> Any:
        self.used.add(name)
        if name not in self.data:
            if default is ...:
                raise self.fail(name, "missing" + self._unknown_like(name))
            return default
        return self.data[name]

    def _accepted_text(self) -> str:
        keys = list(dict.fromkeys([*self.accepted, *sorted(self.used)]))
        return f"accepted here: {', '.join(keys)}"

    def _unknown_like(self, missing: str) -> str:
        """', and range_mm is not a key ...' when the table holds an unknown key like missing."""
        known = set(self.accepted) | self.used
        stem = missing.split("_")[0]
        unknown = [k for k in self.data if k not in known]
        alike = [k for k in unknown if k.split("_")[0] == stem]
        alike += difflib.get_close_matches(missing, [k for k in unknown if k not in alike], 1)
        if not alike:
            return ""
        return f"; the table has the unknown key {alike[0]} instead ({self._accepted_text()})"

    def _plausible(self, name: str, value: float) -> None:
        unit = _unit_suffix(name)
        if unit is None:
            return
        bound = PLAUSIBLE[unit]
        shown = unit.replace("_s", "/s", 1).replace("/s2", "/s^2").replace("/s3", "/s^3")
        shown = shown.replace("hz", "Hz")
        if abs(value) > bound.highest:
            raise self.fail(
                name,
                f"{value:g} {shown} is not plausible for a robot cell (at most "
                f"{bound.highest:g} {shown}: {bound.why}); check the value and its unit",
            )
        if 0 < abs(value) < bound.lowest:
            raise self.fail(
                name,
                f"{value:g} {shown} is not plausible for a robot axis (at least "
                f"{bound.lowest:g} {shown}: {bound.why}); check the value and its unit",
            )

    def number(self, name: str, default: Any = ..., positive: bool = False) -> float:
        value = self.get(name, default)
        if value is None:
            return value
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.fail(name, f"must be a number, got {value!r}")
        if not math.isfinite(value):
            raise self.fail(name, f"must be finite, got {value!r}")
        if positive and value <= 0:
            raise self.fail(name, f"must be positive, got {value!r}")
        self._plausible(name, value)
        return float(value)

    def vector(self, name: str, length: int, default: Any = ...) -> tuple[float, ...]:
        value = self.get(name, default)
        if (
            not isinstance(value, list | tuple)
            or len(value) != length
            or any(isinstance(v, bool) or not isinstance(v, int | float) for v in value)
        ):
            raise self.fail(name, f"must be a list of {length} numbers, got {value!r}")
        if not all(math.isfinite(v) for v in value):
            raise self.fail(name, f"must hold finite numbers, got {value!r}")
        for v in value:
            self._plausible(name, v)
        return tuple(float(v) for v in value)

    def text(self, name: str, default: Any = ...) -> str:
        value = self.get(name, default)
        if not isinstance(value, str):
            raise self.fail(name, f"must be a string, got {value!r}")
        return value

    def table(self, name: str, optional: bool = False) -> _Table | None:
        value = self.get(name, None if optional else ...)
        if value is None:
            return None
        return _Table(value, self.file, self.key(name))

    def reject_unknown(self) -> None:
        unknown = sorted(set(self.data) - self.used)
        if unknown:
            raise self.fail(
                unknown[0],
                f"unknown key (check its spelling and unit suffix; {self._accepted_text()})",
            )


def _pose(table: _Table) -> np.ndarray:
    table.accepted = POSE_KEYS
    xyz = table.vector("xyz_m", 3, default=[0.0, 0.0, 0.0])
    rpy = table.vector("rpy_deg", 3, default=[0.0, 0.0, 0.0])
    table.reject_unknown()
    return transform_from_xyz_rpy(xyz, np.radians(rpy))


def _axis(table: _Table, name: str, kind: JointKind) -> Axis:
    """Limits of one axis; revolute keys in degrees, prismatic keys in metres."""
    unit, scale = ("deg", math.pi / 180.0) if kind is JointKind.REVOLUTE else ("m", 1.0)
    lo, hi = table.vector(f"range_{unit}", 2)
    if lo >= hi:
        raise table.fail(f"range_{unit}", f"minimum {lo:g} must be below maximum {hi:g}")
    vmax = table.number(f"vmax_{unit}_s", positive=True)
    amax = table.number(f"amax_{unit}_s2", positive=True)
    jmax = table.number(f"jmax_{unit}_s3", default=None, positive=True)
    home = table.number(f"home_{unit}", default=0.0 if lo <= 0.0 <= hi else ...)
    if not lo <= home <= hi:
        raise table.fail(f"home_{unit}", f"{home:g} is outside the range [{lo:g}, {hi:g}]")
    return Axis(
        name=name,
        kind=kind,
        lower=lo * scale,
        upper=hi * scale,
        vmax_per_s=vmax * scale,
        amax_per_s2=amax * scale,
        jmax_per_s3=None if jmax is None else jmax * scale,
        home=home * scale,
    )


def _joint(table: _Table, index: int) -> tuple[DHRow, Axis, float | None]:
    name = table.text("name", default=f"j{index + 1}")
    kind_text = table.text("type", default="revolute")
    try:
        kind = JointKind(kind_text)
    except ValueError:
        raise table.fail("type", f"must be 'revolute' or 'prismatic', got {kind_text!r}") from None
    table.accepted = JOINT_KEYS[kind.value]
    a = table.number("a_m")
    alpha = math.radians(table.number("alpha_deg"))
    if kind is JointKind.REVOLUTE:
        d = table.number("d_m")
        theta = math.radians(table.number("offset_deg", default=0.0))
    else:
        d = table.number("offset_m", default=0.0)
        theta = math.radians(table.number("theta_deg", default=0.0))
    axis = _axis(table, name, kind)
    link_radius_m = table.number("link_radius_m", default=None, positive=True)
    table.reject_unknown()
    return DHRow(a, alpha, d, theta), axis, link_radius_m


def _thresholds(table: _Table | None) -> Thresholds:
    defaults = Thresholds()
    if table is None:
        return defaults
    table.accepted = THRESHOLD_KEYS
    deg = math.pi / 180.0

    def value(key: str, default_si: float, scale: float = 1.0) -> float:
        v = table.number(key, default=default_si / scale)
        if v < 0:
            raise table.fail(key, f"must not be negative, got {v:g}")
        return v * scale

    result = Thresholds(
        position_margin_rad=value("position_margin_deg", defaults.position_margin_rad, deg),
        position_margin_m=value("position_margin_mm", defaults.position_margin_m, 1e-3),
        rate_margin_fraction=value("rate_margin_fraction", defaults.rate_margin_fraction),
        wrist_min_rad=value("wrist_min_deg", defaults.wrist_min_rad, deg),
        elbow_min_rad=value("elbow_min_deg", defaults.elbow_min_rad, deg),
        shoulder_min_m=value("shoulder_min_m", defaults.shoulder_min_m),
        manipulability_min=value("manipulability_min", defaults.manipulability_min),
        conditioning_min=value("conditioning_min", defaults.conditioning_min),
    )
    if result.rate_margin_fraction >= 1.0:
        raise table.fail("rate_margin_fraction", "must be below 1")
    if result.conditioning_min >= 1.0:
        raise table.fail("conditioning_min", "must be below 1 (the measure's largest value)")
    table.reject_unknown()
    return result


# --- geometry (DESIGN §8) -------------------------------------------------------------------

#: Solid kinds a robot payload may take; a rig obstacle may also be a plane.
PAYLOAD_SOLIDS = ("sphere", "capsule", "box")
OBSTACLE_SOLIDS = ("sphere", "capsule", "box", "plane")
#: Characters a shape name may not hold: "." joins robot and shape, "/" joins a pair's names.
_NAME_SEPARATORS = "./"


def shape_name(table: _Table, key: str = "name") -> str:
    """A part or obstacle name: a non-empty string without "." or "/" (they join names)."""
    value = table.text(key)
    if not value.strip() or any(c in value for c in _NAME_SEPARATORS):
        raise table.fail(key, f"must be a non-empty name without '.' or '/', got {value!r}")
    return value


def solid_from_table(table: _Table, kinds: tuple[str, ...] = OBSTACLE_SOLIDS) -> Solid:
    """Exactly one of the `kinds` sub-tables of `table`, validated into a solid (SI).

    sphere = {center_m, radius_m}, capsule = {from_m, to_m, radius_m}, box = {center_m,
    size_m (full edges), rpy_deg (optional)}, plane = {point_m, normal (non-zero, normalised)}.
    Non-positive radii and sizes are refused with file, key and value.
    """
    present = [kind for kind in kinds if kind in table.data]
    if len(present) != 1:
        raise ReachgateError(
            f"{table.file}: key {table.path}: needs exactly one of {', '.join(kinds)}, "
            f"got {', '.join(present) or 'none'}"
        )
    kind = present[0]
    sub = table.table(kind)
    if kind == "sphere":
        solid: Solid = Sphere(sub.vector("center_m", 3), sub.number("radius_m", positive=True))
    elif kind == "capsule":
        solid = Capsule(
            sub.vector("from_m", 3), sub.vector("to_m", 3), sub.number("radius_m", positive=True)
        )
    elif kind == "box":
        center = sub.vector("center_m", 3)
        size = sub.vector("size_m", 3)
        if min(size) <= 0:
            raise sub.fail("size_m", f"every edge must be positive, got {list(size)!r}")
        rpy = sub.vector("rpy_deg", 3, default=[0.0, 0.0, 0.0])
        solid = Box(center, size, tuple(math.radians(v) for v in rpy))
    else:
        point = sub.vector("point_m", 3)
        normal = np.array(sub.vector("normal", 3))
        length = float(np.linalg.norm(normal))
        if length == 0.0:
            raise sub.fail("normal", "must not be zero")
        solid = Plane(point, tuple(float(v) for v in normal / length))
    sub.reject_unknown()
    return solid


def _link_offsets(convention: Convention, row: DHRow, joint: Axis) -> tuple[Offset, ...]:
    """The row's non-zero offsets in the order the row walks them (DESIGN §8)."""
    has_d = row.d_m != 0.0 or not joint.is_revolute  # a prismatic d moves: always a capsule
    has_a = row.a_m != 0.0
    order = (
        ((Offset.D, has_d), (Offset.A, has_a))
        if convention is Convention.STANDARD
        else ((Offset.A, has_a), (Offset.D, has_d))
    )
    return tuple(offset for offset, present in order if present)


def _geometry(
    top: _Table,
    convention: Convention,
    rows: tuple[DHRow, ...],
    joints: tuple[Axis, ...],
    link_radii: list[float | None],
    mount_radius_m: float | None,
    carriage_T_base: np.ndarray,
) -> tuple[tuple[Part, ...], tuple[str, ...]]:
    """Parts the file gives geometry for, and the names of those it gives none for."""
    parts: list[Part] = []
    missing: list[str] = []
    if mount_radius_m is None:
        missing.append("base")
    else:
        mount_m = tuple(float(v) for v in carriage_T_base[:3, 3])
        pedestal = Capsule((0.0, 0.0, 0.0), mount_m, mount_radius_m)
        parts.append(Part("base", 0, Attach.BASE, pedestal))
    for i, (row, joint, radius) in enumerate(zip(rows, joints, link_radii, strict=True)):
        name = f"link{i + 1}"
        offsets = _link_offsets(convention, row, joint)
        if not offsets:  # both offsets zero: the row adds no length, nothing to describe
            continue
        if radius is None:
            missing.append(name)
        else:
            parts.append(Part(name, i + 1, Attach.LINK, LinkCapsules(radius, offsets)))
    payloads = top.get("payload", default=[])
    if not isinstance(payloads, list):
        raise top.fail("payload", "must be [[payload]] tables")
    if not payloads:
        missing.append("payload")
    taken = {"base", *(f"link{i + 1}" for i in range(len(rows)))}
    for k, item in enumerate(payloads):
        table = _Table(item, top.file, f"payload[{k + 1}]")
        name = shape_name(table)
        if name in taken:
            raise table.fail("name", f"{name!r} is used twice or names a link or the base")
        taken.add(name)
        solid = solid_from_table(table, PAYLOAD_SOLIDS)
        table.reject_unknown()
        parts.append(Part(name, len(rows) + 1, Attach.FLANGE, solid))
    return tuple(parts), tuple(missing)


def robot_from_dict(data: dict[str, Any], source: str = "<dict>") -> Robot:
    """Validate a parsed robot description (the TOML structure of DESIGN §3) into a Robot."""
    top = _Table(data, source, "")
    top.accepted = TOP_KEYS
    name = top.text("name")
    convention_text = top.text("convention", default="standard")
    try:
        convention = Convention(convention_text)
    except ValueError:
        raise top.fail(
            "convention", f"must be 'standard' or 'modified', got {convention_text!r}"
        ) from None

    rail = None
    cell_T_rail = np.eye(4)
    rail_table = top.table("rail", optional=True)
    if rail_table is not None:
        rail_table.accepted = RAIL_KEYS
        frame = rail_table.get("frame", default={})
        cell_T_rail = _pose(_Table(frame, source, rail_table.key("frame")))
        rail = _axis(rail_table, "rail", JointKind.PRISMATIC)
        rail_table.reject_unknown()

    mount = top.table("mount", optional=True)
    mount_radius_m = None if mount is None else mount.number("radius_m", None, positive=True)
    carriage_T_base = np.eye(4) if mount is None else _pose(mount)

    joint_list = top.get("joints", default=None)
    if not isinstance(joint_list, list) or not joint_list:
        raise top.fail("joints", "needs at least one [[joints]] table")
    parsed = [
        _joint(_Table(item, source, f"joints[{i + 1}]"), i) for i, item in enumerate(joint_list)
    ]
    names = [axis.name for _, axis, _ in parsed]
    for i, joint_name in enumerate(names):
        if joint_name in names[:i] or joint_name == "rail":
            raise ReachgateError(
                f"{source}: key joints[{i + 1}].name: {joint_name!r} is used twice or reserved"
            )

    tool = top.table("tool", optional=True)
    flange_T_tool = np.eye(4) if tool is None else _pose(tool)
    thresholds = _thresholds(top.table("thresholds", optional=True))
    rows = tuple(row for row, _, _ in parsed)
    joints = tuple(axis for _, axis, _ in parsed)
    parts, missing = _geometry(
        top, convention, rows, joints, [r for _, _, r in parsed], mount_radius_m, carriage_T_base
    )
    top.reject_unknown()
    return Robot(
        name=name,
        convention=convention,
        rows=rows,
        joints=joints,
        rail=rail,
        cell_T_rail=cell_T_rail,
        carriage_T_base=carriage_T_base,
        flange_T_tool=flange_T_tool,
        thresholds=thresholds,
        source=source,
        parts=parts,
        geometry_missing=missing,
        has_tool=tool is not None,
    )


def looks_like_csv(text: str) -> bool:
    """True when the first line that is not a '#' comment or blank is a header with t_s."""
    for line in text.splitlines():
        if line.strip() and not line.lstrip().startswith("#"):
            return "t_s" in line and ("," in line or ";" in line or "\t" in line)
    return False


def load_robot(path: str | Path) -> Robot:
    """Load and validate a robot TOML file. Raises ReachgateError naming file, key and value."""
    return robot_from_dict(read_toml(path, "robot"), source=str(path))


def read_toml(path: str | Path, what: str) -> dict[str, Any]:
    """The parsed TOML of a description file; `what` names the kind of file in messages.
    Raises ReachgateError naming the file (missing, a folder, empty, not UTF-8, not TOML)."""
    path = Path(path)
    label = str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ReachgateError(f"{label}: no such file") from None
    except IsADirectoryError:
        raise ReachgateError(f"{label}: is a folder, not a {what} file") from None
    except OSError as error:
        raise ReachgateError(f"{label}: cannot read ({error.strerror})") from None
    return parse_toml_bytes(raw, label, what)


def parse_toml_bytes(raw: bytes, label: str, what: str) -> dict[str, Any]:
    """The parsed TOML of a description file's bytes (read_toml's rules and messages; label
    names the file). Raises ReachgateError."""
    if not raw.strip():
        raise ReachgateError(f"{label}: the file is empty")
    if b"\x00" in raw:
        raise ReachgateError(f"{label}: binary data (NUL bytes), not a text file")
    try:
        text = raw.decode("utf-8").removeprefix("\ufeff")  # a byte-order mark some editors write
    except UnicodeDecodeError as error:
        line = raw.count(b"\n", 0, error.start) + 1
        line_start = raw.rfind(b"\n", 0, error.start) + 1
        column = len(raw[line_start : error.start].decode("utf-8", errors="replace")) + 1
        raise ReachgateError(
            f"{label} line {line}, column {column}: byte 0x{raw[error.start]:02x} is not UTF-8 "
            "text; save the file as UTF-8 (it may be Latin-1 or Windows-1252)"
        ) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        if looks_like_csv(text):
            raise ReachgateError(
                f"{label}: this looks like a trajectory (CSV with a t_s column), not a robot "
                "file (TOML); are the arguments swapped?"
            ) from None
        raise ReachgateError(f"{label}: not valid TOML ({error})") from None
