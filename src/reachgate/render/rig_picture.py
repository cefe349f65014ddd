"""Pictures of a rig: top (x-y) and side (x-z) views of every robot's shapes and the cell's
obstacles, in the rig frame (`reachgate rig --plot`), and the pictures of a rig check
(`check RIG SCENARIO --plot`): the clearance of the pairs that come near, the rig at the
moment of least clearance, and each robot's axis panels.

Shapes are drawn as their outlines projected on the view plane (capsules as rounded bars,
boxes as the hull of their corners); the DH chain of each robot is drawn as a thin line, so
an arm without geometry still shows. Robots differ by hatch and line style, every one named
in the legend; no meaning rests on colour alone. matplotlib is imported lazily.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from reachgate.checking.intervals import Check, Severity
from reachgate.checking.rig_check import RigReport
from reachgate.kinematics.bodies import (
    HalfSpace,
    OrientedBox,
    Segment,
    link_points,
    obstacle_primitive,
    pose_parts,
)
from reachgate.model.rig import Rig
from reachgate.render.pictures import (
    _HATCHES,
    _new_figure,
    _require_png,
    _save,
    _shade,
    decimate,
    plot_report,
)

#: Figure size of the rig picture: 1400 × 650 pixels.
RIG_SIZE_IN = (14.0, 6.5)
#: Figure size of a rig check's picture: 1400 × 1100 pixels.
RIG_REPORT_SIZE_IN = (14.0, 11.0)
_MARKERS = ("o", "s", "^", "D", "v", "x")
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


def draw_rig_views(view_axes, rig: Rig, q_by_robot: dict | None = None) -> None:
    """Draw the top and side views of the rig into two matplotlib axes. q_by_robot: robot
    name -> (n_axes,) axes to draw it at (default: home)."""
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
    for ax, (view, u, v) in zip(view_axes, VIEWS, strict=True):
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


def plot_rig(rig: Rig, path: str | Path) -> Path:
    """Write the rig's top and side views at home as PNG. Returns the path."""
    path = _require_png(Path(path))
    figure = _new_figure(RIG_SIZE_IN)
    draw_rig_views(figure.subplots(1, 2), rig)
    figure.suptitle(f"rig {rig.name} at home (rig frame)")
    _save(figure, path)
    return path


def least_clearance_sample(report: RigReport) -> tuple[int, str | None, float | None]:
    """(sample index, pair, distance m) of the least clearance measured over the run; the
    first sample and None when no pair came within near_m."""
    closest = {} if report.clearance is None else report.clearance.closest_m
    best = (0, None, None)
    for pair, distance in closest.items():
        if np.isfinite(distance).any():
            i = int(np.nanargmin(distance))
            if best[2] is None or distance[i] < best[2]:
                best = (i, pair, float(distance[i]))
    return best


def robot_picture_path(path: Path, robot_name: str) -> Path:
    """Where a rig check writes one robot's axis picture: FILE-ROBOT.png beside FILE.png."""
    return path.with_name(f"{path.stem}-{robot_name.replace(' ', '_')}{path.suffix}")


def plot_rig_report(report: RigReport, rig: Rig, path: str | Path) -> list[Path]:
    """The pictures of a rig check: FILE.png with the clearance of every pair that came within
    near_m (against min_m and near_m, violation rows hatched) and the rig from above and from
    the side at the moment of least clearance; FILE-ROBOT.png with each robot's axis panels.
    Returns the paths written."""
    path = plot_rig_clearance(report, rig, path)
    written = [path]
    for placed in rig.robots:
        own = robot_picture_path(path, placed.name)
        written.append(plot_report(report.robots[placed.name], placed.robot, own))
    return written


def plot_rig_clearance(report: RigReport, rig: Rig, path: str | Path) -> Path:
    """FILE.png of plot_rig_report alone: the clearance panel and the rig's two views."""
    path = _require_png(Path(path))
    figure = _new_figure(RIG_REPORT_SIZE_IN)
    grid = figure.add_gridspec(2, 2, height_ratios=(1.0, 1.3))
    ax = figure.add_subplot(grid[0, :])
    t = report.t_s
    limits = rig.clearance
    closest = {} if report.clearance is None else report.clearance.closest_m
    rows = [r for r in report.violations
            if r.check is Check.CLEARANCE and r.severity is Severity.VIOLATION]  # fmt: skip
    _shade(ax, rows, t, lambda r: _HATCHES[r.severity.value])
    for k, (pair, distance) in enumerate(sorted(closest.items())):
        t_drawn, drawn = decimate(t[np.isfinite(distance)], distance[np.isfinite(distance)])
        ax.plot(t_drawn, drawn * 1000.0, color="black", linewidth=1.0, marker=_MARKERS[k % 6],
                markevery=max(1, t_drawn.size // 15), markersize=4, markerfacecolor="white",
                linestyle=("-", "--", ":", "-.")[k % 4], label=pair)  # fmt: skip
    ax.axhline(limits.min_m * 1000.0, color="black", linewidth=1.4, label="min_m (violation)")
    ax.axhline(limits.near_m * 1000.0, color="black", linewidth=0.8, linestyle="--",
               label="near_m")  # fmt: skip
    ax.set_xlim(t[0], t[-1])
    ax.set_ylim(min(0.0, *(np.nanmin(d) * 1000.0 for d in closest.values())) - 10.0,
                limits.near_m * 1000.0 * 2.0)  # fmt: skip
    ax.set_xlabel("time, s")
    ax.set_ylabel("distance, mm")
    title = "clearance of every pair that comes within near_m (NaN gaps: proved farther)"
    if not closest:
        title = "clearance: no pair comes within near_m"
    ax.set_title(title, loc="left", fontsize=10)
    ax.grid(True, color="0.85", linewidth=0.5)
    ax.legend(loc="upper right", fontsize=7, ncol=2, framealpha=1.0)
    index, pair, distance = least_clearance_sample(report)
    q_by_robot = {name: r.solution.q[index] for name, r in report.robots.items()}
    draw_rig_views([figure.add_subplot(grid[1, 0]), figure.add_subplot(grid[1, 1])], rig,
                   q_by_robot)  # fmt: skip
    verdict = "PASS" if report.passed else "FAIL"
    moment = f"at t = {t[index]:.3f} s"
    if pair is not None:
        moment += f", least clearance {pair}: {distance * 1000.0:.1f} mm"
    figure.suptitle(f"rig {report.robot} / {report.trajectory}: {verdict}; views {moment}")
    _save(figure, path)
    return path
