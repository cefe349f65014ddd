"""Shapes for clearance (DESIGN §8, §9): solids, robot parts and fixed obstacles.

Every solid is a frozen value in SI units, expressed in the frame its owner names: a robot
Part says which of the robot's frames carries it (`Attach`), an Obstacle lies in the rig
frame. Orientations follow DESIGN §2 (R = Rz(yaw) · Ry(pitch) · Rx(roll)). Loading and
validation live with the files that carry them (model/robot.py, the rig file).
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

import numpy as np

from reachgate.model.transforms import transform_from_xyz_rpy

Vector3 = tuple[float, float, float]


@dataclass(frozen=True)
class Sphere:
    """A ball: centre (m) and radius (m)."""

    center_m: Vector3
    radius_m: float


@dataclass(frozen=True)
class Capsule:
    """Every point within radius_m of the segment from_m -> to_m (m)."""

    from_m: Vector3
    to_m: Vector3
    radius_m: float


@dataclass(frozen=True)
class Box:
    """An oriented box: centre (m), full edge lengths (m), orientation [roll, pitch, yaw] (rad)."""

    center_m: Vector3
    size_m: Vector3
    rpy_rad: Vector3

    @property
    def frame_T_box(self) -> np.ndarray:
        """(4, 4) the box's own frame (centre, edges along its axes) in its owner's frame."""
        return transform_from_xyz_rpy(self.center_m, self.rpy_rad)

    @property
    def half_m(self) -> np.ndarray:
        """(3,) half edge lengths."""
        return 0.5 * np.asarray(self.size_m, dtype=float)


@dataclass(frozen=True)
class Plane:
    """A half-space: solid on the side the unit normal points away from (DESIGN §8)."""

    point_m: Vector3
    normal: Vector3


Solid = Sphere | Capsule | Box | Plane


class Attach(Enum):
    """Which robot frame carries a part."""

    BASE = "base"  # the pedestal: the carriage frame on a rail, else the robot file's cell frame
    LINK = "link"  # along a DH row's offsets, posed from the two DH frames that row joins
    FLANGE = "flange"  # payloads: the last DH frame, before [tool]


class Offset(Enum):
    """One of a DH row's two offsets."""

    D = "d"  # along z (the previous z in the standard convention, the row's own z in modified)
    A = "a"  # along x (the row's own x in standard, the previous x in modified)


@dataclass(frozen=True)
class LinkCapsules:
    """Capsules of one radius along a DH row's offsets, in the order the row walks them.

    Standard convention: (d, a): d along the previous z, then a along the new x. Modified:
    (a, d): a along the previous x, then d along the new z. A zero offset gives no capsule (a
    prismatic joint's d always gives one: its length moves).
    """

    radius_m: float
    offsets: tuple[Offset, ...]


@dataclass(frozen=True)
class Part:
    """One named shape fixed to a robot: the pedestal (row 0), a link (its DH row) or a payload.

    Payload rows are the row after the last DH row (DESIGN §9: self pairs are checked two or
    more rows apart).
    """

    name: str
    row: int
    attach: Attach
    shape: Sphere | Capsule | Box | LinkCapsules


@dataclass(frozen=True)
class Obstacle:
    """Fixed geometry of the cell, in the rig frame."""

    name: str
    solid: Solid
