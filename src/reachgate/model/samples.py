"""The rules every sample of a commanded motion obeys, whatever file or array it comes from.

Values are finite; time strictly increases, by steps of at least STEP_MIN_S; times, positions
and angles lie within plausible bounds for a robot cell; quaternions are unit to
UNIT_QUATERNION_TOL. The bounds catch typing errors, wrong units and corrupt values (a
position of 1e300 m, a time of 1e12 s), long before float arithmetic would overflow, so no
check downstream meets such a number. They are our choice (common practice: they lie far
outside any cell we know of, robot cells being tens of metres across and replayed scenarios
minutes to hours long), not a standard; docs/reference.md lists them with these reasons.

first_fault checks (N, C) values in one vectorised pass and names the earliest broken rule.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from reachgate.model.transforms import UNIT_QUATERNION_TOL


@dataclass(frozen=True)
class SampleBound:
    """The largest magnitude a sample of one quantity may have, in its SI unit, and why."""

    highest: float
    unit: str
    why: str


#: Times: scenarios run minutes to hours (1e6 s is 11.6 days). Clock times counted from an
#: epoch (about 1.8e9 s in 2026) are refused: float64 holds them to about 2.4e-7 s only, a
#: quarter of a per mille of a 1 ms step, which the derivative checks would amplify.
TIME_BOUND = SampleBound(
    1e6,
    "s",
    "a replayed scenario runs minutes to hours; clock times since an epoch keep a 1 ms step "
    "to only about 2e-7 s in float64: subtract the first time",
)

#: Position coordinates in the scenario frame: ten times the longest plausible rail or
#: gantry of a robot file (robot.PLAUSIBLE["m"], 100 m). No arm reaches further, so a log
#: in a world or map frame must be given relative to the cell first.
POSITION_BOUND = SampleBound(
    1000.0,
    "m",
    "ten times the longest plausible rail or gantry: no arm of a robot cell reaches further; "
    "give the motion relative to the cell, not in a world or map frame",
)

#: Roll, pitch and yaw: a thousand turns, so that an unwrapped heading logged over hours fits.
ANGLE_BOUND = SampleBound(
    2000.0 * math.pi,
    "rad",
    "a thousand turns: even an unwrapped heading logged for hours stays inside",
)

#: The smallest time step: a million samples a second, a thousand times the rate of real-time
#: simulations and robot controllers (about 0.25 to 4 kHz; common practice). A smaller step is
#: a repeated or rounded time stamp, and would turn into absurd speeds.
STEP_MIN_S = 1e-6
STEP_WHY = (
    "a million samples a second, a thousand times the rate of real-time simulations and robot "
    "controllers; a smaller step is a repeated or rounded time stamp"
)


#: A bound converted into another unit (deg, mm) is rounded: values within this fraction
#: beyond it are in, so that the bound as written in any unit (360000 deg) is inside.
_BOUND_SLACK = 1e-12


@dataclass(frozen=True)
class ColumnRule:
    """The bound of one column as given: its values times scale are in bound.unit.

    unit: the unit the values are given in (as the message shows them).
    """

    bound: SampleBound
    unit: str
    scale: float = 1.0

    @property
    def limit(self) -> float:
        """The largest magnitude in the column's own unit."""
        return self.bound.highest / self.scale * (1.0 + _BOUND_SLACK)


TIME_RULE = ColumnRule(TIME_BOUND, "s")


def length_rule(unit: str, scale: float) -> ColumnRule:
    return ColumnRule(POSITION_BOUND, unit, scale)


def angle_rule(unit: str, scale: float) -> ColumnRule:
    return ColumnRule(ANGLE_BOUND, unit, scale)


def quaternion_lengths(q: np.ndarray) -> np.ndarray:
    """(N,) lengths of (N, 4) quaternions (inf, without a warning, for huge components)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.sqrt(np.einsum("ij,ij->i", q, q))


def first_fault(
    values: np.ndarray, rules: tuple[ColumnRule | None, ...], quaternion_at: int | None = None
) -> tuple[int, int, str] | None:
    """The earliest sample that breaks a rule, as (row, column index, what is wrong), or None.

    values: (N, C) with time in column 0; rules: C column rules (None: no magnitude bound,
    as for quaternion components); quaternion_at: the first of 4 quaternion columns, if any.
    Ties within a row go to a value out of bound, then the time step, then the quaternion.
    No numpy warning is raised whatever the values.
    """
    finite = np.isfinite(values)
    if not finite.all():
        row, col = divmod(int(np.argmin(finite.ravel())), values.shape[1])
        return row, col, f"{float(values[row, col])!r} is not a finite number"
    faults: list[tuple[int, int, str]] = []
    limits = np.array([np.inf if r is None else r.limit for r in rules])
    beyond = np.abs(values) > limits
    if beyond.any():
        row, col = divmod(int(np.argmax(beyond.ravel())), values.shape[1])
        faults.append((row, col, _beyond_text(float(values[row, col]), rules[col])))
    t = values[:, 0]
    with np.errstate(over="ignore", invalid="ignore"):
        steps = np.diff(t)
    short = ~(steps >= STEP_MIN_S)
    if short.any():
        row = int(np.argmax(short)) + 1
        faults.append((row, 0, _step_text(float(t[row - 1]), float(t[row]))))
    if quaternion_at is not None:
        length = quaternion_lengths(values[:, quaternion_at : quaternion_at + 4])
        off = ~(np.abs(length - 1.0) <= UNIT_QUATERNION_TOL)
        if off.any():
            row = int(np.argmax(off))
            faults.append(
                (
                    row,
                    quaternion_at,
                    f"quaternion length {length[row]:.9g} is more than "
                    f"{UNIT_QUATERNION_TOL:g} from 1",
                )
            )
    return min(faults, key=lambda f: f[0]) if faults else None


def out_of_bound(value: float, rule: ColumnRule) -> str | None:
    """What is wrong with one value given in rule.unit beyond its bound, or None (for a
    value given outside a file, such as an option)."""
    if abs(value) > rule.limit:
        return _beyond_text(value, rule)
    return None


def _beyond_text(value: float, rule: ColumnRule) -> str:
    bound = rule.bound
    shown = f"±{bound.highest / rule.scale:g} {rule.unit}"
    if rule.unit != bound.unit:
        shown += f" ({bound.highest:g} {bound.unit})"
    return (
        f"{value:.12g} {rule.unit} is beyond the plausible {shown} for a robot cell ({bound.why}); "
        "check the value and its unit"
    )


def _step_text(before_s: float, at_s: float) -> str:
    if at_s == before_s:
        return f"time {at_s!r} s repeats the time of the sample before"
    if at_s < before_s:
        return f"time {at_s!r} s is before the sample before ({before_s!r} s)"
    return (
        f"time step {at_s - before_s:.3g} s (from {before_s!r} s to {at_s!r} s) is below the "
        f"plausible {STEP_MIN_S:g} s ({STEP_WHY})"
    )
