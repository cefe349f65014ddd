"""The check of a whole rig (DESIGN §8, §9): every robot's own checks, then clearance.

Each robot runs the one-robot pipeline unchanged, on its body's trajectory, placed in its own
cell frame (the scenario's placement in the rig frame seen from the robot's base), with its
rail policy from the command line or else the rig file. Clearance then poses every robot's
shapes from the solved axes and measures every pair the rig's rules keep. One report: every
row with its axis named `robot.axis` (plain names for a rig of one robot), one verdict, one
slow-down factor (the largest any robot needs), the margins of every axis and pair.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from reachgate.checking.clearance import (
    ClearanceResult,
    ClearanceSettings,
    LeftOut,
    PairPlan,
    PlacedRobot,
    check_clearance,
    plan_pairs,
)
from reachgate.checking.intervals import Severity, Violation, sort_rows
from reachgate.checking.pipeline import CheckSettings, Placement, Report, Verdict, check
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ, RailPolicy
from reachgate.checking.slowdown import stretch_rows
from reachgate.model.rig import Rig, RigRobot
from reachgate.model.robot import Robot
from reachgate.model.trajectory import PLAIN_BODY, Scenario, Trajectory
from reachgate.model.transforms import invert_transform, matrix_to_rpy
from reachgate.version import __version__


@dataclass(frozen=True)
class RailChoice:
    """A rail policy for every robot with a rail (the command line's --rail options)."""

    policy: RailPolicy = RailPolicy.FIXED
    at_m: float | None = None
    bandwidth_hz: float = DEFAULT_BANDWIDTH_HZ


@dataclass(frozen=True, eq=False)
class RigReport:
    """The result of one rig check; JSON keys as DESIGN §6 (`robot` is the rig's name).

    robots: each robot's own report, axes under their plain names (arrays for plots);
    robot_settings: the settings each robot was checked with (its placement is the scenario
    in that robot's cell frame); clearance: the pair distances (None without any pair);
    left_out: the pairs not checked and why (JSON: in the notes).
    """

    tool_version: str
    robot: str
    trajectory: str
    samples: int
    duration_s: float
    verdict: Verdict
    violations: tuple[Violation, ...]
    margins: dict[str, dict[str, float | None]]
    slowdown: float | None
    settings: CheckSettings
    notes: tuple[str, ...]
    robots: dict[str, Report] = field(repr=False)
    robot_settings: dict[str, CheckSettings] = field(repr=False)
    clearance: ClearanceResult | None = field(repr=False)
    left_out: tuple[LeftOut, ...]
    t_s: np.ndarray = field(repr=False)

    @property
    def passed(self) -> bool:
        return self.verdict is Verdict.PASS

    def as_dict(self) -> dict:
        settings = rig_settings_dict(
            self.settings,
            {
                name: (self.robots[name].robot, "rail" in self.robots[name].axis_names, s)
                for name, s in self.robot_settings.items()
            },
        )
        return {
            "tool_version": self.tool_version,
            "robot": self.robot,
            "trajectory": self.trajectory,
            "samples": self.samples,
            "duration_s": self.duration_s,
            "verdict": self.verdict.value,
            "violations": [v.as_dict() for v in self.violations],
            "margins": _finite_or_none(self.margins),
            "slowdown": self.slowdown,
            "settings": settings,
            "notes": [
                *self.notes,
                *(f"clearance not checked for {x.a}/{x.b}: {x.reason}" for x in self.left_out),
            ],
        }

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.as_dict(), indent=indent, allow_nan=False)


def rig_settings_dict(
    settings: CheckSettings, robots: dict[str, tuple[str, bool, CheckSettings]]
) -> dict:
    """The settings of a rig check as JSON: settings.as_dict() with the rail keys given per
    robot under "robots" (robots: rig name -> (robot's own name, has a rail, its settings);
    rail None for a robot without one)."""
    out = settings.as_dict()
    for key in ("rail", "rail_at_m", "rail_bandwidth_hz"):
        out.pop(key)
    out["robots"] = {
        name: {
            "robot": robot,
            "rail": s.rail.value if has_rail else None,
            "rail_at_m": s.rail_at_m,
            "rail_bandwidth_hz": s.rail_bandwidth_hz,
        }
        for name, (robot, has_rail, s) in robots.items()
    }
    return out


def _finite_or_none(margins: dict) -> dict:
    """Margins with every NaN or infinite value as None (JSON null, DESIGN §6)."""
    return {
        axis: {k: v if v is not None and math.isfinite(v) else None for k, v in values.items()}
        for axis, values in margins.items()
    }


#: The rails of a rig's check: one choice for every robot with a rail, or a choice per robot
#: name (robots left out keep the rig file's), or None (the rig file's for every robot).
Rails = RailChoice | Mapping[str, RailChoice] | None


def rail_choice(placed: RigRobot, rails: Rails) -> RailChoice:
    """The rail policy a robot of the rig is checked with: `rails` (its own entry when a
    mapping) if given, else the rig file's, else fixed at home (also for a robot without a
    rail, whose policy nothing reads)."""
    if isinstance(rails, Mapping):
        rails = rails.get(placed.name)
    if placed.robot.rail is None:
        return RailChoice()
    if rails is not None:
        return rails
    if placed.rail is not None:
        return RailChoice(
            RailPolicy(placed.rail.policy),
            placed.rail.at_m,
            placed.rail.bandwidth_hz or DEFAULT_BANDWIDTH_HZ,
        )
    return RailChoice()


def rig_rails(rig: Rig, rails: Rails = None) -> dict[str, RailChoice]:
    """The rail policy of every robot of the rig that has a rail (rail_choice): name -> it."""
    return {p.name: rail_choice(p, rails) for p in rig.robots if p.robot.rail is not None}


def robot_settings(placed: RigRobot, settings: CheckSettings, rails: Rails):
    """The one-robot settings of a robot of the rig: the scenario placed in its cell frame
    (cell_T_scenario = cell_T_rig · rig_T_scenario) and its rail policy (rail_choice)."""
    cell_T_scenario = invert_transform(placed.rig_T_cell) @ settings.placement.cell_T_scenario()
    placement = Placement(
        tuple(float(v) for v in cell_T_scenario[:3, 3]),
        tuple(float(v) for v in matrix_to_rpy(cell_T_scenario[:3, :3])),
    )
    rail = rail_choice(placed, rails)
    return replace(
        settings,
        placement=placement,
        rail=rail.policy,
        rail_at_m=rail.at_m,
        rail_bandwidth_hz=rail.bandwidth_hz,
    )


def clearance_settings(rig: Rig) -> ClearanceSettings:
    limits = rig.clearance
    return ClearanceSettings(
        min_m=limits.min_m,
        near_m=limits.near_m,
        contact=frozenset(frozenset(pair) for pair in limits.contact),
        ignore=frozenset(frozenset(pair) for pair in limits.ignore),
    )


def placed_robots(rig: Rig) -> tuple[PlacedRobot, ...]:
    return tuple(PlacedRobot(r.name, r.robot, r.rig_T_cell) for r in rig.robots)


def rig_pairs(rig: Rig) -> PairPlan:
    """The pairs of shapes the rig's clearance check measures, and those it leaves out (they
    depend on the rig alone, not on the scenario or its placement)."""
    return plan_pairs(placed_robots(rig), rig.obstacles, clearance_settings(rig))


def check_rig(
    rig: Rig,
    scenario: Scenario,
    settings: CheckSettings | None = None,
    rails: Rails = None,
    *,
    verify_slowdown: bool = True,
    plan: PairPlan | None = None,
) -> RigReport:
    """Check every robot of the rig on its body of the scenario, and the clearance of every
    pair of shapes. settings: placement of the scenario in the rig frame, loop delay; its rail
    fields are not read (rails: one choice for every robot with a rail, or one per robot name,
    else the rig file's). verify_slowdown=False: the robots' slow-down factors are the scaling
    law's, not measured on the stretched case (checking.pipeline.check), as a search needs.
    plan: the rig's pairs (rig_pairs(rig)), for callers that check one rig many times.
    """
    settings = settings or CheckSettings()
    bodies = rig.bodies(scenario)
    prefix = len(rig.robots) > 1
    reports: dict[str, Report] = {}
    used: dict[str, CheckSettings] = {}
    rows: list[Violation] = []
    margins: dict[str, dict[str, float | None]] = {}
    notes: list[str] = []
    if scenario.ignored_columns and not scenario.is_plain:  # plain: the robot's report says it
        notes.append(f"columns kept out of the check: {', '.join(scenario.ignored_columns)}")
    for placed in rig.robots:
        used[placed.name] = robot_settings(placed, settings, rails)
        report = check(
            placed.robot, bodies[placed.name], used[placed.name], verify_slowdown=verify_slowdown
        )
        reports[placed.name] = report

        def named(axis: str, robot: str = placed.name) -> str:
            return f"{robot}.{axis}" if prefix else axis

        rows += [replace(row, axis=named(row.axis)) for row in report.violations]
        margins.update({named(axis): values for axis, values in report.margins.items()})
        notes += [f"{placed.name}: {note}" for note in report.notes]
        missing = placed.robot.geometry_missing
        if missing:
            notes.append(
                f"{placed.name}: no geometry for {', '.join(missing)}; "
                "those parts are not checked for clearance"
            )

    clearance = None
    robots = placed_robots(rig)
    limits = clearance_settings(rig)
    plan = plan_pairs(robots, rig.obstacles, limits) if plan is None else plan
    if plan.checked:
        clearance = check_clearance(
            scenario.t_s,
            robots,
            {name: r.solution.q for name, r in reports.items()},
            rig.obstacles,
            plan,
            limits,
            trusted={name: r.solution.reach_excess_m <= 0.0 for name, r in reports.items()},
        )
        rows += clearance.rows
        margins.update({pair: {"clearance": m} for pair, m in clearance.margins.items()})
        notes += clearance.notes
    else:
        notes.append(
            "no pair of shapes to check for clearance (no geometry, or every pair left out)"
        )

    rows = sort_rows(rows)
    failing = any(r.severity is Severity.VIOLATION for r in rows)
    return RigReport(
        tool_version=__version__,
        robot=rig.name,
        trajectory=scenario.name,
        samples=scenario.n_samples,
        duration_s=scenario.duration_s,
        verdict=Verdict.FAIL if failing else Verdict.PASS,
        violations=tuple(rows),
        margins=margins,
        slowdown=_rig_slowdown(reports, failing, rows),
        settings=settings,
        notes=tuple(notes),
        robots=reports,
        robot_settings=used,
        clearance=clearance,
        left_out=plan.left_out,
        t_s=scenario.t_s,
    )


def _rig_slowdown(reports: dict[str, Report], failing: bool, rows: list[Violation]):
    """The stretch that clears every robot's speed, accel, jerk and lag rows: the largest any
    robot's own measured factor. Robots are checked apart, so the largest clears them all.
    None when no such row fails, or when a robot's rows have no factor that clears them."""
    if not failing:
        return 1.0
    if not stretch_rows(rows):
        return None
    needed = 1.0
    for report in reports.values():
        if stretch_rows(report.violations):
            if report.slowdown is None:
                return None
            needed = max(needed, report.slowdown)
    return needed


def check_any(
    model: Robot | Rig,
    case: Trajectory | Scenario,
    settings: CheckSettings | None = None,
    rails: Rails = None,
) -> Report | RigReport:
    """One check of a robot or a rig (the library's `reachgate.check`).

    A robot (or a rig made of a robot file alone) with a one-body case gives the one-robot
    Report exactly as `checking.pipeline.check` does, its rail from settings (or `rails`);
    a rig gives a RigReport (see check_rig).
    """
    if isinstance(model, Rig) and not model.alone:
        if isinstance(case, Trajectory):
            case = Scenario.from_trajectories({PLAIN_BODY: case}, name=case.name)
        return check_rig(model, case, settings, rails)
    robot = model.robots[0].robot if isinstance(model, Rig) else model
    settings = settings or CheckSettings()
    if rails is not None:
        settings = replace(
            settings, rail=rails.policy, rail_at_m=rails.at_m, rail_bandwidth_hz=rails.bandwidth_hz
        )
    if isinstance(case, Scenario):
        case = case.body(PLAIN_BODY, only_one=True)
    return check(robot, case, settings)
