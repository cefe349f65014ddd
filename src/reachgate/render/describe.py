"""Text description of a robot for `reachgate robot`: DH table, limits, home, reach, solver."""

from __future__ import annotations

import math

import numpy as np

from reachgate.kinematics.chain import cell_T_base, forward
from reachgate.kinematics.closed_form import (
    SphericalWristSolver,
    closed_form_obstacle,
    is_spherical_wrist,
    wrist_axes_meet,
)
from reachgate.kinematics.path_ik import solver_kind
from reachgate.kinematics.singularity import characteristic_length_m
from reachgate.model.robot import Robot
from reachgate.model.transforms import matrix_to_rpy
from reachgate.render.terminal import fixed, plain_table, table_width, tidy, wrap_items

#: Random configurations used to estimate the TCP's reach from the base (seeded, repeatable).
REACH_SAMPLES = 20000
REACH_SEED = 20261201


def sampled_reach_m(robot: Robot) -> float:
    """Largest TCP distance from the arm base over seeded random in-range configurations, m."""
    rng = np.random.default_rng(REACH_SEED)
    q = rng.uniform(robot.lower, robot.upper, size=(REACH_SAMPLES, robot.n_axes))
    if robot.has_rail:
        q[:, 0] = robot.rail.home
    tcp = forward(robot, q)[:, :3, 3]
    rail = np.full(1, robot.rail.home) if robot.has_rail else None
    base = cell_T_base(robot, rail).reshape(-1, 4, 4)[0, :3, 3]
    return float(np.max(np.linalg.norm(tcp - base, axis=1)))


def describe_robot(robot: Robot) -> str:
    """A plain-text page describing a validated robot."""

    from reachgate.render.check_report import plain_console

    console, buffer = plain_console(table_width())
    console.print(f"robot: {robot.name} ({robot.source})")
    console.print(
        f"DH convention: {robot.convention.value}; {len(robot.joints)} arm joints; "
        f"rail: {'yes' if robot.has_rail else 'no'}"
    )
    dh = plain_table()
    for column in ("joint", "type", "a mm", "alpha deg", "d mm", "theta offset deg"):
        dh.add_column(column, justify="left" if column in ("joint", "type") else "right")
    for joint, row in zip(robot.joints, robot.rows, strict=True):
        d_text = f"{row.d_m * 1000:.1f}" + (" + q" if not joint.is_revolute else "")
        theta_text = f"{math.degrees(row.theta_offset_rad):.2f}" + (
            " + q" if joint.is_revolute else ""
        )
        dh.add_row(
            joint.name,
            joint.kind.value,
            f"{row.a_m * 1000:.1f}",
            f"{math.degrees(row.alpha_rad):.2f}",
            d_text,
            theta_text,
        )
    console.print(dh)

    limits = plain_table()
    for column in ("axis", "unit", "min", "max", "home", "vmax /s", "amax /s^2", "jmax /s^3"):
        limits.add_column(column, justify="left" if column in ("axis", "unit") else "right")
    for axis in robot.axes:
        scale, unit = (180 / math.pi, "deg") if axis.is_revolute else (1000.0, "mm")
        jmax = "-" if axis.jmax_per_s3 is None else f"{axis.jmax_per_s3 * scale:.1f}"
        limits.add_row(
            axis.name,
            unit,
            f"{axis.lower * scale:.1f}",
            f"{axis.upper * scale:.1f}",
            f"{axis.home * scale:.1f}",
            f"{axis.vmax_per_s * scale:.1f}",
            f"{axis.amax_per_s2 * scale:.1f}",
            jmax,
        )
    console.print(limits)

    home = forward(robot, robot.home[None])[0]
    rpy = np.degrees(matrix_to_rpy(home[:3, :3]))
    xyz = home[:3, 3] * 1000
    items = [
        f"home TCP in the cell: x {xyz[0]:.1f} y {xyz[1]:.1f} z {xyz[2]:.1f} mm",
        f"roll {fixed(rpy[0])} pitch {fixed(rpy[1])} yaw {fixed(rpy[2])} deg",
    ]
    console.print(wrap_items(items, console.width, ", "), soft_wrap=True)
    spherical = is_spherical_wrist(robot.chain)
    meet = "meet in one point" if wrist_axes_meet(robot.chain) else "do not meet in one point"
    console.print(f"wrist axes: 4, 5 and 6 {meet}")
    console.print(f"IK solver: {solver_kind(robot).value}")
    obstacle = closed_form_obstacle(robot.chain)
    if obstacle is not None:
        console.print(f"no closed form: {obstacle}")
    if spherical:
        solver = SphericalWristSolver(robot.chain)
        branch = solver.branch_of(robot.home[-6:] + robot.chain.theta_offset_rad)
        console.print(f"home branch (kept along every path): {branch.describe()}")
        console.print(
            f"wrist-centre reach from the shoulder: {solver.outer_radius_m * 1000:.1f} mm "
            f"(inner limit {solver.inner_radius_m * 1000:.1f} mm)"
        )
    console.print(
        f"TCP reach from the arm base (sampled over the joint ranges): "
        f"{sampled_reach_m(robot) * 1000:.1f} mm"
    )
    if robot.has_rail:
        console.print(
            f"rail travel: {(robot.rail.upper - robot.rail.lower) * 1000:.0f} mm "
            "along the rail frame's +x"
        )
    th = robot.thresholds
    items = [
        f"thresholds: position margin {math.degrees(th.position_margin_rad):.2f} deg / "
        f"{th.position_margin_m * 1000:.1f} mm",
        f"rate margin {th.rate_margin_fraction:.0%}",
        f"wrist {math.degrees(th.wrist_min_rad):.1f} deg",
        f"elbow {math.degrees(th.elbow_min_rad):.1f} deg",
        f"shoulder {th.shoulder_min_m * 1000:.0f} mm",
        f"manipulability floor {th.manipulability_min:g}",
    ]
    console.print(wrap_items(items, console.width, ", "), soft_wrap=True)
    if not spherical:
        items = [
            f"singularities: scale-free measure on every sample, floor {th.conditioning_min:g}",
            f"(characteristic length {characteristic_length_m(robot) * 1000:.0f} mm)",
        ]
        console.print(wrap_items(items, console.width, " "), soft_wrap=True)
    return tidy(buffer.getvalue())
