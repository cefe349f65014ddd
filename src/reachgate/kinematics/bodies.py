"""A robot's shapes posed over whole arrays of axis values (DESIGN §8), and motion bounds.

Shapes come out as *primitives* in the rig frame, component-major so that each coordinate is
one contiguous (M,) row:

- `Segment`: a capsule (a sphere is a zero-length one): ends p0_m, p1_m (3, M), radius_m;
- `OrientedBox`: centre_m (3, M), axes (3, 3, M) with axes[c] the box's c-th axis as a (3, M)
  unit vector, half_m (3,) half edge lengths.

Link capsules follow the DH walk: the chain is walked once in its canonical standard form and
every intermediate point recorded, giving a polyline Q whose points 2i-2, 2i-1, 2i are the
start, knee and end of file row i in both conventions (standard: P(i-1), +d along the
previous z, +a along the new x; modified: O(i-1), +a along the previous x, +d along the new z).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgate.kinematics.chain import _as_arrays, _link_step, split_axes
from reachgate.model.geometry import (
    Attach,
    Box,
    Capsule,
    LinkCapsules,
    Obstacle,
    Offset,
    Part,
    Plane,
    Sphere,
)
from reachgate.model.robot import Convention, Robot


@dataclass(frozen=True)
class Segment:
    """A capsule over M samples: ends (3, M) in the rig frame, radius (m)."""

    p0_m: np.ndarray
    p1_m: np.ndarray
    radius_m: float


@dataclass(frozen=True)
class OrientedBox:
    """A box over M samples: centre (3, M), axes (3, 3, M) (axes[c] = box axis c), half (3,)."""

    center_m: np.ndarray
    axes: np.ndarray
    half_m: np.ndarray


@dataclass(frozen=True)
class HalfSpace:
    """A fixed plane obstacle: solid where normal · (x - point) < 0; point, normal (3, 1)."""

    point_m: np.ndarray
    normal: np.ndarray


Primitive = Segment | OrientedBox | HalfSpace


def _columns_from(T: np.ndarray):
    """(4, 4) -> frame columns (x, y, z, p), each a list of three floats."""
    return tuple([float(T[k, c]) for k in range(3)] for c in range(4))


def _point(frame, local) -> np.ndarray:
    """A point given in a frame (columns x, y, z, p of (M,) arrays) -> (3, M)."""
    x, y, z, p = frame
    return np.stack([p[k] + x[k] * local[0] + y[k] * local[1] + z[k] * local[2] for k in range(3)])


def _solid_in_frame(solid: Sphere | Capsule | Box, frame) -> Primitive:
    if isinstance(solid, Sphere):
        center = _point(frame, solid.center_m)
        return Segment(center, center, solid.radius_m)
    if isinstance(solid, Capsule):
        return Segment(_point(frame, solid.from_m), _point(frame, solid.to_m), solid.radius_m)
    x, y, z, _ = frame
    R = solid.frame_T_box[:3, :3]
    axes = np.stack(
        [np.stack([x[k] * R[0, c] + y[k] * R[1, c] + z[k] * R[2, c] for k in range(3)]) for c in
         range(3)]
    )  # fmt: skip
    return OrientedBox(_point(frame, solid.center_m), axes, solid.half_m)


def _walk(robot: Robot, rig_T_cell: np.ndarray, q: np.ndarray):
    """Carriage frame, polyline points Q (list of (3, M)) and the flange frame, rig frame."""
    q = np.atleast_2d(np.asarray(q, dtype=float))
    m = q.shape[0]
    rail_m, q_arm = split_axes(robot, q)
    rig_T_rail = rig_T_cell @ robot.cell_T_rail
    carriage = _columns_from(rig_T_rail)
    if rail_m is not None:  # the carriage slides along the rail's +x
        carriage = (*carriage[:3], [carriage[3][k] + rail_m * rig_T_rail[k, 0] for k in range(3)])
    carriage = _as_arrays(carriage, m)
    mount = _compose_constant(carriage, robot.carriage_T_base)
    points = [np.stack(mount[3])]
    frame = mount
    chain = robot.chain
    if robot.convention is Convention.MODIFIED:
        frame = _compose_constant(frame, chain.base_T_chain)
        points.append(np.stack(frame[3]))
    x, y, z, p = frame
    for i in range(chain.n):
        x, y, z, p = _link_step(chain, i, q_arm[:, i], x, y, z, p)
        a = float(chain.a_m[i])
        points.append(np.stack([p[k] - a * x[k] for k in range(3)]))  # the knee, before a
        points.append(np.stack(p))
    flange = _as_arrays((x, y, z, p), m)
    return carriage, points, flange


def _compose_constant(frame, T: np.ndarray):
    """Frame columns times a constant (4, 4): the new frame's columns."""
    x, y, z, p = frame
    cols = [[x[k] * T[0, c] + y[k] * T[1, c] + z[k] * T[2, c] for k in range(3)] for c in range(3)]
    origin = [p[k] + x[k] * T[0, 3] + y[k] * T[1, 3] + z[k] * T[2, 3] for k in range(3)]
    return (*cols, origin)


def link_points(robot: Robot, rig_T_cell: np.ndarray, q: np.ndarray) -> list[np.ndarray]:
    """The DH polyline Q in the rig frame: (M, n_axes) -> list of (3, M) points (see module)."""
    return _walk(robot, rig_T_cell, q)[1]


def pose_parts(
    robot: Robot, rig_T_cell: np.ndarray, q: np.ndarray
) -> dict[str, tuple[Primitive, ...]]:
    """Every part of the robot posed in the rig frame: (M, n_axes) -> {part name: primitives}.

    rig_T_cell: (4, 4) the robot file's cell frame in the rig frame.
    """
    carriage, points, flange = _walk(robot, rig_T_cell, q)
    out: dict[str, tuple[Primitive, ...]] = {}
    standard = robot.convention is Convention.STANDARD
    order = (Offset.D, Offset.A) if standard else (Offset.A, Offset.D)
    for part in robot.parts:
        if part.attach is Attach.BASE:
            out[part.name] = (_solid_in_frame(part.shape, carriage),)
        elif part.attach is Attach.FLANGE:
            out[part.name] = (_solid_in_frame(part.shape, flange),)
        else:
            shape: LinkCapsules = part.shape
            start = 2 * part.row - 2
            out[part.name] = tuple(
                Segment(
                    points[start + order.index(o)],
                    points[start + order.index(o) + 1],
                    shape.radius_m,
                )
                for o in shape.offsets
            )
    return out


def obstacle_primitive(obstacle: Obstacle) -> Primitive:
    """A fixed obstacle as one primitive with M = 1 (broadcasts over samples)."""
    solid = obstacle.solid
    if isinstance(solid, Plane):
        return HalfSpace(
            np.asarray(solid.point_m, float)[:, None], np.asarray(solid.normal, float)[:, None]
        )
    frame = _columns_from(np.eye(4))
    frame = tuple([np.full(1, v) for v in column] for column in frame)
    return _solid_in_frame(solid, frame)


# --- motion bounds (Schwarzer, Saha and Latombe 2005) ----------------------------------------


def _part_reach_m(part: Part) -> float:
    """Farthest point of a flange or base part from its frame's origin (m)."""
    shape = part.shape
    if isinstance(shape, Sphere):
        return float(np.linalg.norm(shape.center_m)) + shape.radius_m
    if isinstance(shape, Capsule):
        ends = max(np.linalg.norm(shape.from_m), np.linalg.norm(shape.to_m))
        return float(ends) + shape.radius_m
    return float(np.linalg.norm(shape.center_m) + np.linalg.norm(shape.half_m))


def motion_bounds(robot: Robot, travel: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """(n_axes, n_parts) bound on how far any point of each part moves per unit of each axis.

    A point of part j moves at most sum_i B[i, j] · |Δq_i| when the axes move along a straight
    line in joint space by Δq (Schwarzer, Saha and Latombe 2005): 1 for the rail and for
    prismatic joints (m per m), and for revolute joint i the largest distance any point of the
    part can have from that joint's axis (m per rad), bounded over every configuration by the
    length of the DH polyline from a point of the axis to the part, plus the part's own reach.
    Joints after a part's row do not move it. A prismatic joint's d counts at its longest
    over its range, or over `travel` ((n_axes,) least and largest values of a path) where
    that reaches farther.
    """
    parts = robot.parts
    n_rows = len(robot.rows)
    # polyline lengths in walk order: row i contributes its two offsets (prismatic d: the
    # largest |d| over its range)
    lengths = []
    first = 1 if robot.has_rail else 0
    for i, (row, joint) in enumerate(zip(robot.rows, robot.joints, strict=True)):
        d = abs(row.d_m)
        if not joint.is_revolute:
            ends = [joint.lower, joint.upper]
            if travel is not None:
                ends += [float(travel[0][first + i]), float(travel[1][first + i])]
            d = max(abs(row.d_m + end) for end in ends)
        pair = (d, abs(row.a_m))
        lengths.extend(pair if robot.convention is Convention.STANDARD else pair[::-1])
    cumulative = np.concatenate([[0.0], np.cumsum(lengths)])  # length from Q[0] to Q[k]
    bounds = np.zeros((robot.n_axes, len(parts)))
    for j, part in enumerate(parts):
        if robot.has_rail:
            bounds[0, j] = 1.0
        if part.attach is Attach.BASE:
            continue
        last_row = part.row if part.attach is Attach.LINK else n_rows
        if part.attach is Attach.LINK:
            end_index, extra = 2 * part.row, part.shape.radius_m
        else:
            end_index, extra = 2 * n_rows, _part_reach_m(part)
        for i in range(last_row):
            joint = robot.joints[i]
            if not joint.is_revolute:
                bounds[first + i, j] = 1.0
                continue
            # a point on joint i's axis: P(i-1) = Q[2i] (standard), O(i) = Q[2i+2] (modified),
            # with i counted from 0; the bound walks the polyline from there to the part's end
            axis_index = 2 * i if robot.convention is Convention.STANDARD else 2 * i + 2
            span = abs(cumulative[end_index] - cumulative[min(axis_index, end_index)])
            bounds[first + i, j] = span + extra
    return bounds
