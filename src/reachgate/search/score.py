"""The score of a placement: the worst margin over every case, check and axis.

Every check's margin is a fraction of its own limit, so that checks compare: 0 at the limit,
positive inside (1 = the limit unused), negative beyond.

- position, speed, accel, jerk (and every other entry of the report's `margins`, such as
  clearance pairs): the report's margin as it stands;
- singularity: (measure - floor) / floor from the report's rows, capped at 1 (no row: the
  measure stays above twice its floor, so the capped margin is exactly 1);
- lag: 1 - error / tolerance from the report's rows (no row: at least 10 % of the
  tolerance is left; the placement does not change the lag, so the search leaves it alone);
- clearance (a rig): each checked pair's margin from the report's `margins`, 1 - min_m / d,
  continued along its tangent below min_m / 2 so that touching and overlapping pairs keep
  falling (checking/clearance.py); a row found between samples scores its bound the same way;
- reach: an unreachable sample scores -1 - (distance out of reach) / (the arm's span), so
  the score keeps falling the further the path leaves the workspace and the search is led
  back into it; -1 continues the elbow's singularity margin, which reaches -1 as the arm
  stretches to the edge of its reach;
- a margin that could not be measured (null) counts as 0: not a pass, and never as 1;
- a violation row whose check has no margin of its own (branch) counts as 0 at most.

A placement passes when its score is above 0 and every case's verdict is pass.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from reachgate.checking.clearance import margin_of
from reachgate.checking.intervals import Check, Severity
from reachgate.checking.pipeline import Report
from reachgate.checking.rig_check import RigReport
from reachgate.model.robot import Robot

#: Singularity margins are capped here: no row means the measure is above twice its floor
#: (SINGULARITY_NEAR_FACTOR), where (measure - floor) / floor = 1.
SINGULARITY_CAP = 1.0
#: The score of a path that just leaves the workspace (continues the elbow margin, see above).
REACH_EDGE_SCORE = -1.0
#: The score given to a margin that could not be measured, or to a violation without one.
UNMEASURED_SCORE = 0.0


@dataclass(frozen=True)
class Binding:
    """The worst margin of a placement and where it is: check, axis and case.

    measured: False when the binding term is a margin that could not be measured.
    """

    score: float
    check: str
    axis: str
    case: str
    measured: bool = True

    def as_dict(self) -> dict:
        return {
            "score": self.score,
            "check": self.check,
            "axis": self.axis,
            "case": self.case,
            "measured": self.measured,
        }


def arm_span_m(robot: Robot) -> float:
    """An upper bound of the arm's reach, m: every DH offset and the tool's, end to end.

    Only the scale of the reach term (how far out of reach counts as one more unit).
    """
    links = 0.0
    for row, joint in zip(robot.rows, robot.joints, strict=True):
        stroke = 0.0 if joint.is_revolute else max(-joint.lower, joint.upper)
        links += math.hypot(row.a_m, abs(row.d_m) + stroke)
    return float(links + np.linalg.norm(robot.flange_T_tool[:3, 3]))


def _span_of(axis: str, span_m: float | Mapping[str, float]) -> float:
    """The span of the robot whose axis this is: a rig's axes are `robot.axis` (plain names
    for a rig of one robot)."""
    if not isinstance(span_m, Mapping):
        return span_m
    if len(span_m) == 1:
        return next(iter(span_m.values()))
    return span_m[axis.partition(".")[0]]


def report_binding(
    report: Report | RigReport, span_m: float | Mapping[str, float], case: str | None = None
) -> Binding:
    """The worst margin of one report (see the module docstring), with its check and axis.

    span_m: the arm's span (arm_span_m); for a rig's report, each robot's by its name."""
    case = report.trajectory if case is None else case
    worst = Binding(math.inf, "", "", case)

    def offer(value: float, check: str, axis: str, measured: bool = True) -> None:
        nonlocal worst
        if value < worst.score:
            worst = Binding(float(value), check, axis, case, measured)

    for axis, margins in report.margins.items():
        for kind, value in margins.items():
            if value is None or not math.isfinite(value):
                offer(UNMEASURED_SCORE, kind, axis, measured=False)
            else:
                offer(value, kind, axis)
    measured_kinds = {(axis, kind) for axis, margins in report.margins.items() for kind in margins}
    for row in report.violations:
        if row.check is Check.SINGULARITY:
            offer(min(row.worst / row.limit - 1.0, SINGULARITY_CAP), row.check.value, row.axis)
        elif row.check is Check.LAG:
            offer(1.0 - row.worst / row.limit, row.check.value, row.axis)
        elif row.check is Check.REACH:
            offer(REACH_EDGE_SCORE - row.worst / _span_of(row.axis, span_m), "reach", row.axis)
        elif row.check is Check.CLEARANCE and row.severity is Severity.VIOLATION:
            offer(margin_of(row.worst, row.limit), row.check.value, row.axis)
        elif row.severity is Severity.VIOLATION and (
            (row.axis, row.check.value) not in measured_kinds
        ):
            offer(UNMEASURED_SCORE, row.check.value, row.axis, measured=False)
    if worst.score == math.inf:  # nothing to measure at all: not a pass
        worst = Binding(UNMEASURED_SCORE, "", "", case, measured=False)
    return worst


def worst_of(bindings) -> Binding:
    """The worst of several cases' bindings (the first on ties)."""
    return min(bindings, key=lambda b: b.score)
