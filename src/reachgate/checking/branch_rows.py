"""`branch` rows (DESIGN §6), and which other configuration branches fit where the kept one
leaves a joint range.

The path IK judges every other configuration sample by sample where the kept one leaves an
arm joint's range (kinematics.configurations: all eight closed-form branches, or a search on
general arms). Here that becomes rows: a `branch` row for each run of samples where another
configuration keeps every joint in range, on the joint furthest beyond its range; and on
closed-form arms, the names of the branches that fit over the whole of each `branch` row and
each `position` violation row of an arm joint (Violation.fitting_branches).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from reachgate.checking.intervals import Check, Severity, Violation, intervals
from reachgate.kinematics.configurations import branches_in
from reachgate.kinematics.path_ik import PathSolution
from reachgate.model.robot import Robot


def _sample_span(t_s: np.ndarray, row: Violation) -> slice:
    """The samples (start to end, both included) of a row; times strictly increase."""
    return slice(int(np.searchsorted(t_s, row.start_s)), int(np.searchsorted(t_s, row.end_s)) + 1)


def _fitting(bits: np.ndarray | None, span: slice) -> tuple[str, ...] | None:
    """Names of the branches whose bit is set at every sample of span; None without bits."""
    if bits is None:
        return None
    common = int(np.bitwise_and.reduce(bits[span]))
    return tuple(branch.describe() for branch in branches_in(common))


def branch_rows(robot: Robot, t_s: np.ndarray, solution: PathSolution) -> list[Violation]:
    """`branch` rows: runs of samples where the kept configuration takes an arm joint out of
    its range but another configuration keeps every joint inside (solution.other_branch_fits).

    Each row's axis is the arm joint furthest beyond its range at the row's worst sample, its
    worst that joint's excess over the range (rad, or m for a prismatic joint; limit 0: no
    excess allowed), its fitting_branches the branches that fit at every sample of the row.
    t_s: (N,) strictly increasing times.
    """
    fits = solution.other_branch_fits
    if not fits.any():
        return []
    n_arm = robot.chain.n
    q_arm = solution.q[:, -n_arm:]
    lower, upper = robot.lower[-n_arm:], robot.upper[-n_arm:]
    # where fits is False (in range, or out of reach with undefined q) the excess is not read
    with np.errstate(invalid="ignore"):
        excess = np.maximum(q_arm - upper, lower - q_arm)  # (N, n_arm)
        largest = np.where(fits, excess.max(axis=1), -1.0)
    rows = intervals(
        t_s,
        np.where(fits, 1.0 + largest, -1.0),
        0.0,
        check=Check.BRANCH,
        axis="arm",
        worst_value=largest,
        limit_value=0.0,
        unit="rad",
    )
    arm_axes = robot.axes[-n_arm:]
    named = []
    for row in rows:
        worst = int(np.searchsorted(t_s, row.worst_s))
        joint = arm_axes[int(np.argmax(excess[worst]))]
        named.append(
            replace(
                row,
                axis=joint.name,
                unit="rad" if joint.is_revolute else "m",
                fitting_branches=_fitting(solution.fitting_branch_bits, _sample_span(t_s, row)),
            )
        )
    return named


def with_fitting_branches(
    rows: list[Violation], robot: Robot, t_s: np.ndarray, solution: PathSolution
) -> list[Violation]:
    """rows, with the branches that fit over the whole row named on every `position`
    violation row of an arm joint (closed-form arms; general arms keep None)."""
    bits = solution.fitting_branch_bits
    if bits is None:
        return rows
    arm_names = set(robot.axis_names[-robot.chain.n :])
    return [
        replace(row, fitting_branches=_fitting(bits, _sample_span(t_s, row)))
        if row.check is Check.POSITION
        and row.severity is Severity.VIOLATION
        and row.axis in arm_names
        else row
        for row in rows
    ]
