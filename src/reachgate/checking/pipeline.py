"""The main job for one case: TCP path in, Report out (DESIGN §5 `check`, §6 report).

Pipeline, all on whole arrays: placement -> rail policy -> path IK -> derivatives -> every
check -> intervals, margins and the slow-down factor.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, replace
from enum import Enum

import numpy as np

from reachgate.checking.derivatives import WINDOW_SAMPLES, time_derivatives
from reachgate.checking.intervals import (
    RATE_CHECKS,
    Check,
    IntervalStream,
    Severity,
    Violation,
    intervals,
    sort_rows,
)
from reachgate.checking.lag import DEFAULT_LAG_TOL_RAD, Prediction, lag_errors
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ, RailPolicy, rail_positions
from reachgate.errors import ReachgateError
from reachgate.kinematics.chain import arm_manipulability
from reachgate.kinematics.path_ik import PathSolution, solve_trajectory
from reachgate.kinematics.singularity import conditioning, singularity_kinds
from reachgate.model.robot import Robot
from reachgate.model.trajectory import Trajectory
from reachgate.model.transforms import transform_from_xyz_rpy
from reachgate.version import __version__

#: Default tracking error a loop delay may cause, m (ours; documented in README).
DEFAULT_LAG_TOL_M = 0.001
#: A singularity measure below this multiple of its floor gives a `near` row.
SINGULARITY_NEAR_FACTOR = 2.0
#: The slow-down factor is raised by this relative margin, so that the stretched case's worst
#: rate lands below its limit instead of on it (floating point).
SLOWDOWN_MARGIN = 1e-6
#: With --rail follow a stretch also changes what the rail filter passes, so the factor is
#: checked on the stretched case and raised until its rate rows clear, at most this often.
SLOWDOWN_VERIFY_ROUNDS = 8
#: Samples per block of the rate checks (bounds the (block, n_axes) derivative arrays).
RATE_BLOCK_SAMPLES = 65_536
#: Extra samples on each side of a block, so every local fit sees the same neighbours as in
#: one pass over the whole path.
RATE_HALO_SAMPLES = WINDOW_SAMPLES
#: Samples on each side of an unreachable one whose derivatives are not trusted.
UNTRUSTED_NEIGHBOURS = 4


class Verdict(Enum):
    PASS = "pass"
    FAIL = "fail"


@dataclass(frozen=True)
class Placement:
    """Scenario frame in the cell: translation in m, roll-pitch-yaw in rad."""

    xyz_m: tuple[float, float, float] = (0.0, 0.0, 0.0)
    rpy_rad: tuple[float, float, float] = (0.0, 0.0, 0.0)

    @classmethod
    def parse(cls, text: str) -> Placement:
        """From "x,y,z,roll,pitch,yaw" in m and deg (the --place option)."""
        parts = [p.strip() for p in text.split(",")]
        try:
            values = [float(p) for p in parts]
        except ValueError:
            values = []
        if len(values) != 6 or not all(math.isfinite(v) for v in values):
            raise ReachgateError(
                f"--place: expected six numbers 'x,y,z,roll,pitch,yaw' (m, deg), got {text!r}"
            )
        return cls(tuple(values[:3]), tuple(math.radians(v) for v in values[3:]))

    def cell_T_scenario(self) -> np.ndarray:
        return transform_from_xyz_rpy(self.xyz_m, self.rpy_rad)


@dataclass(frozen=True)
class CheckSettings:
    """How a case is checked: placement, rail policy, loop delay. SI units."""

    placement: Placement = field(default_factory=Placement)
    rail: RailPolicy = RailPolicy.FIXED
    rail_at_m: float | None = None
    rail_bandwidth_hz: float = DEFAULT_BANDWIDTH_HZ
    lag_s: float | None = None
    lag_tol_m: float = DEFAULT_LAG_TOL_M
    lag_tol_rad: float = DEFAULT_LAG_TOL_RAD
    predict: Prediction = Prediction.NONE

    def __post_init__(self) -> None:
        if self.lag_s is not None and not (math.isfinite(self.lag_s) and self.lag_s > 0):
            raise ReachgateError(f"--lag: must be a positive time in s, got {self.lag_s!r}")
        if not (math.isfinite(self.lag_tol_m) and self.lag_tol_m > 0):
            raise ReachgateError(f"--lag-tol: must be a positive distance, got {self.lag_tol_m!r}")
        if not (math.isfinite(self.lag_tol_rad) and self.lag_tol_rad > 0):
            raise ReachgateError(
                f"--lag-tol-deg: must be a positive angle, got {math.degrees(self.lag_tol_rad)!r}"
            )

    def as_dict(self) -> dict:
        return {
            "place_xyz_m": list(self.placement.xyz_m),
            "place_rpy_deg": [math.degrees(v) for v in self.placement.rpy_rad],
            "rail": self.rail.value,
            "rail_at_m": self.rail_at_m,
            "rail_bandwidth_hz": self.rail_bandwidth_hz,
            "lag_s": self.lag_s,
            "lag_tol_m": self.lag_tol_m,
            "lag_tol_rad": self.lag_tol_rad,
            "predict": self.predict.value,
        }


@dataclass(frozen=True, eq=False)
class Report:
    """The result of one check. JSON keys as DESIGN §6; arrays kept for plots and exports.

    t_s: (N,) times; solution.q: (N, n_axes) solved axis values (rail first).
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
    axis_names: tuple[str, ...]
    notes: tuple[str, ...]
    t_s: np.ndarray = field(repr=False)
    solution: PathSolution = field(repr=False)

    @property
    def passed(self) -> bool:
        return self.verdict is Verdict.PASS

    def as_dict(self) -> dict:
        return {
            "tool_version": self.tool_version,
            "robot": self.robot,
            "trajectory": self.trajectory,
            "samples": self.samples,
            "duration_s": self.duration_s,
            "verdict": self.verdict.value,
            "violations": [v.as_dict() for v in self.violations],
            "margins": self.margins,
            "slowdown": self.slowdown,
            "settings": self.settings.as_dict(),
        }

    def to_json(self, indent: int | None = 2) -> str:
        """The report as JSON. A NaN or infinity that slipped through is never written (DESIGN
        §6): it stops the program with the key that holds it."""
        document = self.as_dict()
        where = _first_non_finite(document)
        if where is not None:
            raise ReachgateError(
                f"{self.trajectory}: the report holds a value that is not a finite number at "
                f"{where}; nothing written (a fault of the program: please report it)"
            )
        return json.dumps(document, indent=indent, allow_nan=False)


def _first_non_finite(node, path: str = "report") -> str | None:
    """The key path of the first NaN or infinity in a JSON-ready document, or None."""
    if isinstance(node, float):
        return None if math.isfinite(node) else path
    if isinstance(node, dict):
        children = ((f"{path}.{key}", value) for key, value in node.items())
    elif isinstance(node, list):
        children = ((f"{path}[{i}]", value) for i, value in enumerate(node))
    else:
        return None
    for child_path, value in children:
        found = _first_non_finite(value, child_path)
        if found is not None:
            return found
    return None


def _untrusted(mask: np.ndarray) -> np.ndarray:
    """Grow a (N,) mask by UNTRUSTED_NEIGHBOURS samples each side."""
    if not mask.any():
        return mask
    kernel = np.ones(2 * UNTRUSTED_NEIGHBOURS + 1)
    # mode="full" then the centred slice: mode="same" returns max(N, kernel) samples, which
    # broke paths shorter than the kernel; for longer paths the result is the same.
    grown = np.convolve(mask.astype(float), kernel, mode="full")
    return grown[UNTRUSTED_NEIGHBOURS : UNTRUSTED_NEIGHBOURS + mask.size] > 0


def check(
    robot: Robot,
    trajectory: Trajectory,
    settings: CheckSettings | None = None,
    *,
    verify_slowdown: bool = True,
) -> Report:
    """Check whether the robot can follow every sample of the trajectory. -> Report.

    verify_slowdown=False skips checking the slow-down factor on the stretched case (rail
    follow): every row, margin and the verdict are the same, the factor is the scaling law's.
    The placement search, which reads only margins and rows, checks cases this way.
    """
    settings = settings or CheckSettings()
    report = _check_once(robot, trajectory, settings)
    if (
        verify_slowdown
        and settings.rail is RailPolicy.FOLLOW
        and report.slowdown not in (None, 1.0)
    ):
        report = replace(report, slowdown=_verified_slowdown(robot, trajectory, settings, report))
    return report


def stretched(trajectory: Trajectory, factor: float) -> Trajectory:
    """The same poses with every time step `factor` times longer (from the first sample)."""
    t0 = trajectory.t_s[0]
    return replace(trajectory, t_s=t0 + (trajectory.t_s - t0) * factor)


def _rate_ratio(report: Report) -> float:
    """The stretch that the report's worst speed, accel and jerk still ask for (<= 1: none)."""
    needed = 0.0
    for margins in report.margins.values():
        for kind, power in ((Check.SPEED, 1.0), (Check.ACCEL, 2.0), (Check.JERK, 3.0)):
            if margins.get(kind.value) is not None:
                needed = max(needed, max(1.0 - margins[kind.value], 0.0) ** (1.0 / power))
    return needed


def _verified_slowdown(robot, trajectory, settings, report: Report) -> float | None:
    """The slow-down factor checked on the stretched case (rail follow), or None if rounds
    of raising it never cleared the rate rows."""
    factor = report.slowdown
    for _ in range(SLOWDOWN_VERIFY_ROUNDS):
        ratio = _rate_ratio(_check_once(robot, stretched(trajectory, factor), settings))
        if ratio <= 1.0:
            return factor
        factor *= ratio * (1.0 + SLOWDOWN_MARGIN)
    return None


def _check_once(robot: Robot, trajectory: Trajectory, settings: CheckSettings) -> Report:
    t = trajectory.t_s
    cell_T_scenario = settings.placement.cell_T_scenario()
    rail_m = rail_positions(
        robot,
        t,
        trajectory.scenario_p_m,
        cell_T_scenario,
        settings.rail,
        settings.rail_at_m,
        settings.rail_bandwidth_hz,
    )
    solution = solve_trajectory(robot, trajectory, cell_T_scenario, rail_m)
    q = solution.q
    unreachable = solution.reach_excess_m > 0
    trusted = ~_untrusted(unreachable)
    thresholds = robot.thresholds
    rows, margins, worst_ratio = _rate_rows(robot, t, q, trusted)

    any_unreachable = bool(unreachable.any())
    for i, axis in enumerate(robot.axes):
        qi = q[:, i]
        excess = np.maximum(qi - axis.upper, axis.lower - qi)
        # unreachable samples have no meaningful joint values; with none reachable, no margin
        if any_unreachable:
            excess = np.where(unreachable, -np.inf, excess)
        peak = float(excess.max())
        band = thresholds.position_margin_rad if axis.is_revolute else thresholds.position_margin_m
        if peak > -band:  # else no sample is over or near the range ends: no rows to look for
            mid = 0.5 * (axis.lower + axis.upper)
            rows += intervals(
                t,
                excess,
                band,
                check=Check.POSITION,
                axis=axis.name,
                worst_value=qi,
                limit_value=np.where(qi >= mid, axis.upper, axis.lower),
                unit="rad" if axis.is_revolute else "m",
            )
        half_range = 0.5 * (axis.upper - axis.lower)
        # None (null in JSON): no sample was reachable, so no margin was measured
        position = -peak / half_range if math.isfinite(peak) else None
        margins[axis.name] = {"position": position, **margins[axis.name]}

    rows += _singularity_rows(robot, t, solution, trusted)
    rows += intervals(
        t,
        np.where(unreachable, solution.reach_excess_m, -1.0),
        0.0,
        check=Check.REACH,
        axis="tcp",
        worst_value=solution.reach_excess_m,
        limit_value=0.0,
        unit="m",
    )
    if solution.other_branch_fits.any():
        range_excess = np.max(np.maximum(q - robot.upper, robot.lower - q), axis=1)
        rows += intervals(
            t,
            np.where(solution.other_branch_fits, 1.0 + range_excess, -1.0),
            0.0,
            check=Check.BRANCH,
            axis="arm",
            worst_value=range_excess,
            limit_value=0.0,
            unit="rad",
        )
    if settings.lag_s is not None:
        rows += _lag_rows(trajectory, settings, thresholds.rate_margin_fraction)

    rows = sort_rows(rows)
    failing = [r for r in rows if r.severity is Severity.VIOLATION]
    slowdown = _slowdown(failing, worst_ratio)
    notes = ()
    if trajectory.ignored_columns:
        notes = (f"columns kept out of the check: {', '.join(trajectory.ignored_columns)}",)
    return Report(
        tool_version=__version__,
        robot=robot.name,
        trajectory=trajectory.name,
        samples=trajectory.n_samples,
        duration_s=trajectory.duration_s,
        verdict=Verdict.FAIL if failing else Verdict.PASS,
        violations=tuple(rows),
        margins=margins,
        slowdown=slowdown,
        settings=settings,
        axis_names=robot.axis_names,
        notes=notes,
        t_s=t,
        solution=solution,
    )


def _lag_rows(trajectory: Trajectory, settings: CheckSettings, near_fraction: float):
    """`lag` rows: axis `tcp` for the position error, `tcp-rotation` for the angle, each
    against its tolerance, after the rig's prediction (checking.lag). The errors are the same
    in the scenario frame as in the cell (a rigid placement keeps distances and angles)."""
    errors = lag_errors(
        trajectory.t_s,
        trajectory.scenario_p_m,
        trajectory.scenario_q_wxyz,
        settings.lag_s,
        settings.predict,
    )
    rows = []
    for axis, error, tol, unit in (
        ("tcp", errors.position_m, settings.lag_tol_m, "m"),
        ("tcp-rotation", errors.angle_rad, settings.lag_tol_rad, "rad"),
    ):
        rows += intervals(
            trajectory.t_s,
            error - tol,
            near_fraction * tol,
            check=Check.LAG,
            axis=axis,
            worst_value=error,
            limit_value=tol,
            unit=unit,
        )
    return rows


def _rate_rows(robot: Robot, t: np.ndarray, q: np.ndarray, trusted: np.ndarray):
    """Speed, accel and jerk rows, rate margins and worst limit ratios for every axis.

    q: (N, n_axes). Works block by block (derivatives with a halo of samples on each side, so
    each block's values equal one pass over the whole path) to keep memory bounded on long
    cases. Returns (rows, {axis: {"speed": m, "accel": m, "jerk": m}}, {Check: worst ratio}).
    """
    n = t.size
    rate_margin = robot.thresholds.rate_margin_fraction
    streams, peaks = {}, {}
    for axis in robot.axes:
        unit = "rad" if axis.is_revolute else "m"
        for kind, limit, suffix in (
            (Check.SPEED, axis.vmax_per_s, "/s"),
            (Check.ACCEL, axis.amax_per_s2, "/s^2"),
            (Check.JERK, axis.jmax_per_s3, "/s^3"),
        ):
            if limit is not None:
                streams[axis.name, kind] = (
                    IntervalStream(
                        rate_margin * limit, check=kind, axis=axis.name, unit=unit + suffix
                    ),
                    limit,
                )
                peaks[axis.name, kind] = 0.0
    for first in range(0, n, RATE_BLOCK_SAMPLES):
        last = min(first + RATE_BLOCK_SAMPLES, n)
        lo, hi = max(first - RATE_HALO_SAMPLES, 0), min(last + RATE_HALO_SAMPLES, n)
        rates = time_derivatives(t[lo:hi], q[lo:hi])
        inner = slice(first - lo, last - lo)
        ok = trusted[first:last]
        every_sample_trusted = bool(ok.all())
        by_kind = {
            Check.SPEED: rates.velocity,
            Check.ACCEL: rates.acceleration,
            Check.JERK: rates.jerk,
        }
        for i, axis in enumerate(robot.axes):
            for kind, values in by_kind.items():
                if (axis.name, kind) not in streams:
                    continue
                stream, limit = streams[axis.name, kind]
                magnitude = np.abs(values[inner, i])
                if not every_sample_trusted:
                    magnitude[~ok] = 0.0
                stream.feed(t[first:last], magnitude - limit, magnitude, limit)
                peaks[axis.name, kind] = max(peaks[axis.name, kind], float(np.max(magnitude)))
    rows: list[Violation] = []
    margins: dict[str, dict[str, float | None]] = {axis.name: {} for axis in robot.axes}
    worst_ratio = {Check.SPEED: 0.0, Check.ACCEL: 0.0, Check.JERK: 0.0}
    measured = bool(trusted.any())  # else every rate was masked: no margin, not 1.0
    for (name, kind), (stream, limit) in streams.items():
        rows += stream.finish()
        ratio = peaks[name, kind] / limit
        margins[name][kind.value] = 1.0 - ratio if measured else None
        worst_ratio[kind] = max(worst_ratio[kind], ratio)
    return rows, margins, worst_ratio


def _singularity_rows(
    robot: Robot, t: np.ndarray, solution: PathSolution, trusted: np.ndarray
) -> list[Violation]:
    """Singularity rows. Closed-form arms: the wrist, elbow and shoulder factors. General
    arms: the scale-free measure (kinematics/singularity.py), always. Any arm, when
    manipulability_min > 0: Yoshikawa's measure as well. Rows of the last two are named by
    the kind the geometry shows at their worst sample (`general` where it shows none)."""
    th = robot.thresholds
    floors = {"wrist": th.wrist_min_rad, "elbow": th.elbow_min_rad, "shoulder": th.shoulder_min_m}
    units = {"wrist": "rad", "elbow": "rad", "shoulder": "m"}
    measures = dict(solution.measures)
    # unreachable samples are masked below; finite values keep the measures finite there
    q = np.where(np.isfinite(solution.q), solution.q, robot.home)
    named = set()
    if not measures and th.conditioning_min > 0:
        measures["conditioning"] = conditioning(robot, q)
        floors["conditioning"], units["conditioning"] = th.conditioning_min, "1"
        named.add("conditioning")
    if th.manipulability_min > 0:
        measures["manipulability"] = arm_manipulability(robot, q)
        floors["manipulability"], units["manipulability"] = th.manipulability_min, "1"
        named.add("manipulability")
    rows: list[Violation] = []
    for kind, measure in measures.items():
        floor = floors[kind]
        if floor <= 0:
            continue
        found = intervals(
            t,
            np.where(trusted, floor - measure, -np.inf),
            (SINGULARITY_NEAR_FACTOR - 1) * floor,
            check=Check.SINGULARITY,
            axis=kind,
            worst_value=measure,
            limit_value=floor,
            unit=units[kind],
        )
        if kind in named and found:
            worst = np.minimum(np.searchsorted(t, [v.worst_s for v in found]), t.size - 1)
            found = [
                replace(v, axis=name)
                for v, name in zip(found, singularity_kinds(robot, q[worst]), strict=True)
            ]
        rows += found
    return rows


def _slowdown(failing: list[Violation], worst_ratio: dict[Check, float]) -> float | None:
    """Smallest uniform time stretch k >= 1 that clears every rate violation, or None.

    Stretching time by k divides speeds by k, accelerations by k², jerks by k³. None when
    violations remain that no stretch clears and no rate violation is there to clear.
    """
    if not failing:
        return 1.0
    if not any(r.check in RATE_CHECKS for r in failing):
        return None
    needed = max(
        worst_ratio[Check.SPEED],
        math.sqrt(worst_ratio[Check.ACCEL]),
        math.cbrt(worst_ratio[Check.JERK]),
    )
    return max(1.0, needed * (1.0 + SLOWDOWN_MARGIN))
