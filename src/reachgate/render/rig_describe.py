"""Text description of a rig for `reachgate rig`: robots, bases, rails, geometry, obstacles,
clearance limits, the pairs checked and the pairs left out with the reason."""

from __future__ import annotations

import math
from collections import Counter

from reachgate.checking.clearance import PairPlan, plan_pairs
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ
from reachgate.checking.rig_check import clearance_settings, placed_robots
from reachgate.model.geometry import Box, Capsule, Plane, Sphere
from reachgate.model.rig import Rig
from reachgate.model.transforms import matrix_to_rpy


def _mm(values) -> str:
    return "(" + ", ".join(f"{v * 1000:.0f}" for v in values) + ") mm"


def _deg(values) -> str:
    return "(" + ", ".join(f"{math.degrees(v):.1f}" for v in values) + ") deg"


def describe_solid(solid) -> str:
    """One line for a solid, lengths in mm and angles in degrees."""
    if isinstance(solid, Plane):
        return (
            f"plane through {_mm(solid.point_m)}, normal {tuple(round(v, 3) for v in solid.normal)}"
        )
    if isinstance(solid, Box):
        return f"box at {_mm(solid.center_m)}, size {_mm(solid.size_m)}, rpy {_deg(solid.rpy_rad)}"
    if isinstance(solid, Sphere):
        return f"sphere at {_mm(solid.center_m)}, radius {solid.radius_m * 1000:.0f} mm"
    if isinstance(solid, Capsule):
        return (
            f"capsule {_mm(solid.from_m)} to {_mm(solid.to_m)}, "
            f"radius {solid.radius_m * 1000:.0f} mm"
        )
    return type(solid).__name__


def pair_groups(rig: Rig, plan: PairPlan) -> list[tuple[str, int]]:
    """Checked pairs counted by kind: robot against robot, robot against obstacles, self."""
    robot_of = {f"{r.name}.{p.name}": r.name for r in rig.robots for p in r.robot.parts}

    def group(a: str, b: str) -> str:
        ra, rb = robot_of.get(a), robot_of.get(b)
        if ra and rb:
            return f"{ra} itself" if ra == rb else f"{ra} against {rb}"
        return f"{ra or rb} against obstacles"

    counts = Counter(group(a, b) for a, b in plan.checked)
    return sorted(counts.items())


def describe_rig(rig: Rig) -> str:
    """A plain-text page describing a validated rig."""
    from reachgate.render.check_report import plain_console

    console, buffer = plain_console(110)
    console.print(f"rig: {rig.name} ({rig.source})")
    if rig.alone:
        console.print("a robot file alone: one robot, no obstacles, plain scenario columns")
    for placed in rig.robots:
        robot = placed.robot
        console.print(f"robot {placed.name}: {robot.name} ({robot.source})")
        console.print(f"  follows body: {placed.body or '(plain columns)'}")
        base = placed.rig_T_cell
        console.print(
            f"  base (its cell frame in the rig): at {_mm(base[:3, 3])}, "
            f"rpy {_deg(matrix_to_rpy(base[:3, :3]))}"
        )
        if robot.rail is None:
            rail = "none"
        elif placed.rail is None:
            rail = "fixed at home unless the command line says otherwise"
        elif placed.rail.policy == "follow":
            bandwidth = placed.rail.bandwidth_hz or DEFAULT_BANDWIDTH_HZ
            rail = f"follow ({bandwidth:g} Hz) unless the command line says otherwise"
        else:
            at = "home" if placed.rail.at_m is None else f"{placed.rail.at_m:g} m"
            rail = f"fixed at {at} unless the command line says otherwise"
        console.print(f"  rail: {rail}")
        shapes = ", ".join(p.name for p in robot.parts) or "none"
        console.print(f"  shapes: {shapes}")
        missing = ", ".join(robot.geometry_missing) or "none"
        console.print(f"  no geometry (not checked for clearance): {missing}")
    console.print("obstacles:" if rig.obstacles else "obstacles: none")
    for obstacle in rig.obstacles:
        console.print(f"  {obstacle.name}: {describe_solid(obstacle.solid)}")
    limits = rig.clearance
    console.print(
        f"clearance: violation below {limits.min_m * 1000:.0f} mm, "
        f"near below {limits.near_m * 1000:.0f} mm"
    )
    plan = plan_pairs(placed_robots(rig), rig.obstacles, clearance_settings(rig))
    console.print(f"pairs checked: {len(plan.checked)}")
    for group, count in pair_groups(rig, plan):
        console.print(f"  {group}: {count}")
    console.print(
        f"pairs left out: {len(plan.left_out)}" if plan.left_out else "pairs left out: none"
    )
    for left in plan.left_out:
        console.print(f"  {left.a}/{left.b}: {left.reason}")
    console.print(
        "self pairs are checked two or more DH rows apart (the base is row 0, payloads the row "
        "after the last); pairs closer than the violation distance at home are left out"
    )
    return buffer.getvalue()
