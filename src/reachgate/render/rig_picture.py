"""Pictures of a rig: top (x-y) and side (x-z) views of every robot's shapes and the cell's
obstacles, in the rig frame (`reachgate rig --plot`, and the rig check's picture).

Shapes are drawn as their outlines projected on the view plane (capsules as rounded bars,
boxes as the hull of their corners); the DH chain of each robot is drawn as a thin line, so
an arm without geometry still shows. Robots differ by hatch and line style, every one named
in the legend; no meaning rests on colour alone. matplotlib is imported lazily.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from reachgate.kinematics.bodies import (
    HalfSpace,
    OrientedBox,
    Segment,
    link_points,
    obstacle_primitive,
    pose_parts,
)
from reachgate.model.rig import Rig
from reachgate.render.pictures import _new_figure, _require_png, _save

#: Figure size of the rig picture: 1400 × 650 pixels.
RIG_SIZE_IN = (14.0, 6.5)
#: The views: (title, index of the horizontal axis, index of the vertical axis).
VIEWS = (("top view (from +z)", 0, 1), ("side view (from -y)", 0, 2))
#: Points on each rounded end of a projected capsule.
ARC_POINTS = 12
#: Margin around the drawn shapes, m.
MARGIN_M = 0.5
_ROBOT_STYLES = (
    dict(hatch="////", linestyle="-"),
    dict(hatch="\\\\\\\\", linestyle="--"),
    dict(hatch="xxxx", linestyle="-."),
    dict(hatch="....", linestyle=":"),
)
_OBSTACLE_STYLE = dict(hatch="++", linestyle="-")
_PLANE_STYLE = dict(hatch="..", linestyle="-")


def _turn(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> float:
    """z of (b - a) × (c - a): positive for a left turn."""
    return float((b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]))


def _hull(points: np.ndarray) -> np.ndarray:
    """Convex hull (K, 2) of 2-D points (M, 2), counter-clockwise (monotone chain)."""
    pts = np.unique(np.round(points, 12), axis=0)
    if len(pts) < 3:
        return pts

    def half(seq):
        out: list = []
        for p in seq:
            while len(out) >= 2 and _turn(out[-2], out[-1], p) <= 0:
                out.pop()
            out.append(p)
        return out

    lower, upper = half(pts), half(pts[::-1])
    return np.array(lower[:-1] + upper[:-1])


def _outline(primitive: Segment | OrientedBox, u: int, v: int) -> np.ndarray:
    """The 2-D outline (K, 2) of one primitive at its first sample in the (u, v) view."""
    if isinstance(primitive, Segment):
        ends = np.array([primitive.p0_m[[u, v], 0], primitive.p1_m[[u, v], 0]])
        angles = np.linspace(0.0, 2.0 * np.pi, 2 * ARC_POINTS, endpoint=False)
        circle = primitive.radius_m * np.column_stack([np.cos(angles), np.sin(angles)])
        return _hull(np.concatenate([ends[0] + circle, ends[1] + circle]))
    if isinstance(primitive, OrientedBox):
        signs = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)])
        axes = primitive.axes[:, :, 0]  # (3 box axes, 3 coordinates)
        corners = primitive.center_m[:, 0] + (signs * primitive.half_m) @ axes
        return _hull(corners[:, [u, v]])
    raise TypeError(f"no outline for {type(primitive).__name__}")


def _draw_plane(ax, plane: HalfSpace, u: int, v: int, hidden: int, limits, style) -> bool:
    """A half-space seen edge-on (its normal in the view plane): its boundary line and a hatch
    on the solid side. Returns False (nothing drawn) when it is not seen edge-on."""
    n = plane.normal[:, 0]
    if abs(n[hidden]) > 1e-9:
        return False
    point = plane.point_m[:, 0]
    (u0, u1), (v0, v1) = limits
    far = 2.0 * max(u1 - u0, v1 - v0)
    direction = np.array([-n[v], n[u]])
    centre = np.array([point[u], point[v]])
    inward = -np.array([n[u], n[v]])
    a, b = centre - far * direction, centre + far * direction
    polygon = np.array([a, b, b + far * inward, a + far * inward])
    ax.fill(*polygon.T, fill=False, linewidth=0.0, **style)
    ax.plot(*np.array([a, b]).T, color="black", linewidth=1.2)
    return True


def placed_rail(placed) -> np.ndarray | None:
    """The ends (2, 3) of a robot's rail range in the rig frame, or None without a rail."""
    robot = placed.robot
    if robot.rail is None:
        return None
    rig_T_rail = placed.rig_T_cell @ robot.cell_T_rail
    along = np.array([robot.rail.lower, robot.rail.upper])
    return rig_T_rail[:3, 3] + along[:, None] * rig_T_rail[:3, 0]


def _points(primitive) -> np.ndarray:
    """3-D points (K, 3) bounding one primitive at its first sample (None for a plane)."""
    if isinstance(primitive, Segment):
        ends = np.array([primitive.p0_m[:, 0], primitive.p1_m[:, 0]])
        r = primitive.radius_m
        return np.concatenate([ends - r, ends + r])
    if isinstance(primitive, OrientedBox):
        signs = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)])
        return primitive.center_m[:, 0] + (signs * primitive.half_m) @ primitive.axes[:, :, 0]
    return np.empty((0, 3))


def plot_rig(rig: Rig, path: str | Path, q_by_robot: dict | None = None, title: str = "") -> Path:
    """Write the rig's top and side views as PNG. q_by_robot: robot name -> (n_axes,) axes to
    draw it at (default: home). Returns the path."""
    path = _require_png(Path(path))
    figure = _new_figure(RIG_SIZE_IN)
    posed = []
    for k, placed in enumerate(rig.robots):
        robot = placed.robot
        q = robot.home if q_by_robot is None else np.asarray(q_by_robot[placed.name], float)
        prims = [p for ps in pose_parts(robot, placed.rig_T_cell, q[None]).values() for p in ps]
        chain = np.hstack(link_points(robot, placed.rig_T_cell, q[None])).T  # (points, 3)
        posed.append((placed.name, prims, chain, _ROBOT_STYLES[k % len(_ROBOT_STYLES)]))
    obstacles = [(o.name, obstacle_primitive(o)) for o in rig.obstacles]
    every = np.concatenate(
        [chain for _, _, chain, _ in posed]
        + [_points(p) for _, prims, _, _ in posed for p in prims]
        + [_points(p) for _, p in obstacles]
        + [ends for r in rig.robots if (ends := placed_rail(r)) is not None]
    )
    lo, hi = every.min(axis=0) - MARGIN_M, every.max(axis=0) + MARGIN_M
    for ax, (view, u, v) in zip(figure.subplots(1, 2), VIEWS, strict=True):
        for name, prims, chain, style in posed:
            for prim in prims:
                ax.fill(*_outline(prim, u, v).T, facecolor="none", edgecolor="black",
                        linewidth=0.8, **style)  # fmt: skip
            ax.plot(chain[:, u], chain[:, v], color="0.3", linewidth=1.0, marker="o",
                    markersize=2.5, linestyle=style["linestyle"], label=name)  # fmt: skip
            rail = placed_rail(rig.robot(name))
            if rail is not None:
                ax.plot(rail[:, u], rail[:, v], color="black", linewidth=2.0, linestyle=":",
                        label=f"{name} rail (range)")  # fmt: skip
        limits = ((lo[u], hi[u]), (lo[v], hi[v]))
        for name, prim in obstacles:
            if isinstance(prim, HalfSpace):
                if _draw_plane(ax, prim, u, v, 3 - u - v, limits, _PLANE_STYLE):
                    ax.plot([], [], color="black", label=f"{name} (plane)")
                continue
            ax.fill(*_outline(prim, u, v).T, facecolor="none", edgecolor="black",
                    linewidth=1.0, label=name, **_OBSTACLE_STYLE)  # fmt: skip
        ax.set_xlim(*limits[0])
        ax.set_ylim(*limits[1])
        ax.set_aspect("equal", adjustable="box")
        ax.set_xlabel("x (m)")
        ax.set_ylabel("y (m)" if v == 1 else "z (m)")
        ax.set_title(view)
        ax.grid(True, linewidth=0.3)
        ax.legend(loc="upper left", fontsize=8)
    figure.suptitle(title or f"rig {rig.name} at home (rig frame)")
    _save(figure, path)
    return path
