"""Rendering of a rig check: colour-free table, JSON (DESIGN §6) and CSV.

The same layout as one robot's report, with a line per robot (its body, rail, solver and
branch) and the clearance margins of every pair checked.
"""

from __future__ import annotations

import io
import json

import numpy as np

from reachgate.checking.intervals import Severity
from reachgate.checking.rig_check import RigReport
from reachgate.render.check_report import (
    TABLE_MAX_ROWS,
    branch_explanations,
    plain_console,
    print_findings,
    rail_text,
    render_csv,
)
from reachgate.render.files import atomic_output
from reachgate.render.terminal import table_width, tidy, wrap_text


def render_rig_table(
    report: RigReport, width: int | None = None, max_rows: int = TABLE_MAX_ROWS
) -> str:
    """The colour-free text report of a rig check: a line per robot, the clearance pairs
    checked and left out, then the rows, margins, advice and cautions as for one robot."""
    console, buffer = plain_console(width or table_width())

    def say(text: str, first: str = "") -> None:
        console.print(wrap_text(text, console.width, first), soft_wrap=True)

    n_viol = sum(v.severity is Severity.VIOLATION for v in report.violations)
    n_near = len(report.violations) - n_viol
    say(f"reachgate {report.tool_version}: rig {report.robot} / {report.trajectory}")
    say(f"{report.samples} samples over {report.duration_s:.3f} s")
    branch_texts = []
    for name, robot_report in report.robots.items():
        solution = robot_report.solution
        branch = solution.branch.describe() if solution.branch else "kept from home"
        rail = rail_text(report.robot_settings[name], "rail" in robot_report.axis_names)
        say(
            f"{robot_report.robot}, body {robot_report.trajectory}; rail {rail}; "
            f"solver {solution.solver.value}; branch {branch}",
            f"robot {name}: ",
        )
        branch_texts += [f"{name}: {text}" for text in branch_explanations(robot_report)]
    pairs = 0 if report.clearance is None else len(report.clearance.margins)
    reasons = sorted({x.reason.split(" (")[0] for x in report.left_out})
    left = f", {len(report.left_out)} left out ({'; '.join(reasons)})" if reasons else ""
    say(f"{pairs} pairs checked{left}; the list: reachgate rig", "clearance: ")
    for note in report.notes:
        say(note, "note: ")
    verdict = "PASS" if report.passed else "FAIL"
    console.print(f"verdict: {verdict} ({n_viol} violation rows, {n_near} near rows)")
    print_findings(console, report, max_rows, branch_texts)
    return tidy(buffer.getvalue())


def render_rig(report: RigReport, fmt: str, inputs: dict | None = None) -> str:
    """The rig report as table, json or csv text; inputs (sha256 of the rig, robot and
    scenario files) are recorded in the JSON, as for one robot."""
    if fmt == "json":
        document = report.as_dict()
        if inputs:
            document["inputs"] = inputs
        return json.dumps(document, indent=2, allow_nan=False) + "\n"
    if fmt == "csv":
        return render_csv(report)
    return render_rig_table(report)


def write_rig_joints(report: RigReport, rig, path) -> None:
    """Every robot's solved axes as CSV: t_s, then per robot `robot.axis_deg` (or `_m`) columns
    and `robot.reachable`; a robot's axis fields are empty where its sample is out of reach
    (never replay them), as in the one-robot file."""
    columns, values = ["t_s"], [report.t_s]
    for placed in rig.robots:
        solution = report.robots[placed.name].solution
        reachable = solution.reach_excess_m <= 0
        for i, axis in enumerate(placed.robot.axes):
            unit, scale = ("deg", 180.0 / np.pi) if axis.is_revolute else ("m", 1.0)
            columns.append(f"{placed.name}.{axis.name}_{unit}")
            values.append(np.where(reachable, solution.q[:, i] * scale, np.nan))
        columns.append(f"{placed.name}.reachable")
        values.append(reachable.astype(float))
    buffer = io.StringIO()
    np.savetxt(buffer, np.column_stack(values), delimiter=",", fmt="%.17g")
    text = buffer.getvalue().replace("nan", "")  # out of reach: an empty field
    with atomic_output(path) as handle:
        handle.write(f"# solved joint trajectories of {report.trajectory} on rig {report.robot}\n")
        handle.write(
            "# a robot's axis fields are empty where its sample is out of reach "
            "(ROBOT.reachable = 0): never replay them\n"
        )
        handle.write(",".join(columns) + "\n")
        handle.write(text)
