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

from reachgate.checking.branch_rows import branch_rows, with_fitting_branches
from reachgate.checking.derivatives import (
    WINDOW_SAMPLES,
    end_node_steps,
    fit_stride,
    junction_rates,
    time_derivatives,
)
from reachgate.checking.intervals import (
    Check,
    IntervalStream,
    Severity,
    Violation,
    intervals,
    sort_rows,
)
from reachgate.checking.lag import DEFAULT_LAG_TOL_RAD, Prediction, lag_errors
from reachgate.checking.notes import input_notes, unmeasured_rates
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ, RailPolicy, rail_positions
from reachgate.checking.slowdown import (
    SLOWDOWN_MAX,
    smallest_stretch,
    stretch_guess,
    stretch_rows,
)
from reachgate.errors import ReachgateError, UndefinedValueError
from reachgate.kinematics.chain import arm_manipulability
from reachgate.kinematics.path_ik import PathSolution, solve_trajectory
from reachgate.kinematics.singularity import conditioning, singularity_kinds
from reachgate.model.robot import PLAUSIBLE, Robot
from reachgate.model.samples import angle_rule, length_rule, out_of_bound
from reachgate.model.trajectory import Trajectory
from reachgate.model.transforms import transform_from_xyz_rpy
from reachgate.version import __version__

#: Default tracking error a loop delay may cause, m (ours; documented in README).
DEFAULT_LAG_TOL_M = 0.001
#: A singularity measure below this multiple of its floor gives a `near` row.
SINGULARITY_NEAR_FACTOR = 2.0
#: The scaling law's factor is raised by this relative margin before it is checked, so that
#: the stretched case's worst value lands below its limit instead of on it (floating point).
SLOWDOWN_MARGIN = 1e-6
#: Samples per block of the rate checks (bounds the (block, n_axes) derivative arrays).
RATE_BLOCK_SAMPLES = 65_536
#: Extra fit nodes on each side of a block (times the fit's stride in samples), so every local
#: fit sees the same neighbours as in one pass over the whole path.
RATE_HALO_SAMPLES = WINDOW_SAMPLES
#: Fit nodes on each side of an unreachable sample whose derivatives are not trusted (times
#: the fit's stride in samples).
UNTRUSTED_NEIGHBOURS = 4


class Ends(Enum):
    """What the checks assume before the first sample and after the last (DESIGN §11).

    rest: the rig starts and ends at rest, held still at the first and last pose (the rail in
    follow mode keeps following the held pose through its filter), so a path that starts or
    stops moving abruptly gets accel and jerk rows there. free: the path is a window cut out
    of a longer run; nothing is assumed outside it.
    """

    REST = "rest"
    FREE = "free"


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
        rules = (length_rule("m", 1.0),) * 3 + (angle_rule("deg", math.pi / 180.0),) * 3
        names = ("x", "y", "z", "roll", "pitch", "yaw")
        for name, value, rule in zip(names, values, rules, strict=True):
            fault = out_of_bound(value, rule)
            if fault is not None:
                raise ReachgateError(f"--place: {name} {fault}")
        return cls(tuple(values[:3]), tuple(math.radians(v) for v in values[3:]))

    def cell_T_scenario(self) -> np.ndarray:
        return transform_from_xyz_rpy(self.xyz_m, self.rpy_rad)


#: Upper bounds of the check options (common practice, no standard): a motion rig's loop
#: delay is milliseconds to a few hundred; past LAG_MAX_S the number is a unit mistake (ms
#: given as s). A tracking tolerance past LAG_TOL_MAX_M or LAG_TOL_MAX_DEG checks nothing in a
#: cell a few metres across. The rail's follow bandwidth has the robot files' bound for Hz.
LAG_MAX_S = 10.0
LAG_TOL_MAX_M = 1.0
LAG_TOL_MAX_DEG = 180.0


def _refuse_above(option: str, value: float, bound: float, unit: str, why: str) -> None:
    if value > bound:
        raise ReachgateError(f"{option}: {value:.12g} {unit} is above {bound:g} {unit} ({why})")


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
    ends: Ends = Ends.REST

    def __post_init__(self) -> None:
        if self.lag_s is not None and not (math.isfinite(self.lag_s) and self.lag_s > 0):
            raise ReachgateError(f"--lag: must be a positive time in s, got {self.lag_s!r}")
        if not (math.isfinite(self.lag_tol_m) and self.lag_tol_m > 0):
            raise ReachgateError(f"--lag-tol: must be a positive distance, got {self.lag_tol_m!r}")
        if not (math.isfinite(self.lag_tol_rad) and self.lag_tol_rad > 0):
            raise ReachgateError(
                f"--lag-tol-deg: must be a positive angle, got {math.degrees(self.lag_tol_rad)!r}"
            )
        if self.lag_s is not None:
            _refuse_above(
                "--lag", self.lag_s, LAG_MAX_S, "s", "no rig's loop delay; ms given as s?"
            )
        _refuse_above(
            "--lag-tol", 1000.0 * self.lag_tol_m, 1000.0 * LAG_TOL_MAX_M, "mm", "it checks nothing"
        )
        _refuse_above(
            "--lag-tol-deg",
            math.degrees(self.lag_tol_rad),
            LAG_TOL_MAX_DEG,
            "deg",
            "it checks nothing",
        )
        bandwidth, bound = self.rail_bandwidth_hz, PLAUSIBLE["hz"]
        if math.isfinite(bandwidth) and bandwidth > 0:  # rail.py refuses the others
            if not bound.lowest <= bandwidth <= bound.highest:
                raise ReachgateError(
                    f"--rail-bandwidth: {bandwidth:.12g} Hz is outside {bound.lowest:g} to "
                    f"{bound.highest:g} Hz ({bound.why})"
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
            "ends": self.ends.value,
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
            "notes": list(self.notes),
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


def _untrusted(mask: np.ndarray, stride: int = 1) -> np.ndarray:
    """Grow a (N,) mask by UNTRUSTED_NEIGHBOURS fit nodes (`stride` samples each) each side."""
    if not mask.any():
        return mask
    reach = UNTRUSTED_NEIGHBOURS * stride
    kernel = np.ones(2 * reach + 1)
    # mode="full" then the centred slice: mode="same" returns max(N, kernel) samples, which
    # broke paths shorter than the kernel; for longer paths the result is the same.
    grown = np.convolve(mask.astype(float), kernel, mode="full")
    return grown[reach : reach + mask.size] > 0


def _require_finite(values: np.ndarray, t_s: np.ndarray, what: str) -> None:
    """Raise UndefinedValueError if values (N,) or (N, k) hold a NaN or an infinity."""
    bad = ~np.isfinite(values)
    if bad.ndim > 1:
        bad = bad.any(axis=tuple(range(1, bad.ndim)))
    if bad.any():
        first = int(np.argmax(bad))
        raise UndefinedValueError(
            f"{what} undefined (NaN or infinite) at t = {float(t_s[first]):.6g} s (sample "
            f"{first + 1}): nothing was judged, the case cannot pass"
        )


def check(
    robot: Robot,
    trajectory: Trajectory,
    settings: CheckSettings | None = None,
    *,
    verify_slowdown: bool = True,
) -> Report:
    """Check whether the robot can follow every sample of the trajectory. -> Report.

    Raises UndefinedValueError (a ReachgateError) when a NaN or an infinity reaches any
    stage: rail positions, the solved axis values of a reachable sample, a derivative, a
    singularity measure, a lag error. An undefined value never reads as a pass.

    verify_slowdown=False skips measuring the slow-down factor on the stretched case: every
    row, margin and the verdict are the same, the factor is the scaling law's guess. The
    placement search, which reads only margins and rows, checks cases this way.
    """
    settings = settings or CheckSettings()
    # numpy's floating-point warnings stay quiet: every undefined value is caught by name
    # (_require_finite, IntervalStream.feed) and stops the check instead
    with np.errstate(all="ignore"):
        try:
            report = _check_once(robot, trajectory, settings)
        except UndefinedValueError as error:
            raise UndefinedValueError(f"{trajectory.name}: {error}") from None
        if verify_slowdown and stretch_rows(report.violations):
            report = _with_measured_slowdown(robot, trajectory, settings, report)
    return report


def _with_measured_slowdown(robot, trajectory, settings, report: Report) -> Report:
    """The report with its slow-down factor measured on the stretched case (checking/
    slowdown.py: bracketing and bisection on the real check), or None and a note."""

    def rows_after(factor: float) -> list[Violation]:
        return list(_check_once(robot, stretched(trajectory, factor), settings).violations)

    guess = stretch_guess(report.violations) * (1.0 + SLOWDOWN_MARGIN)
    factor = smallest_stretch(rows_after, guess)
    if factor is not None:
        return replace(report, slowdown=factor)
    kinds = sorted({r.check.value for r in stretch_rows(report.violations)})
    note = (
        f"no stretch up to {SLOWDOWN_MAX:g}x clears the {', '.join(kinds)} rows: "
        "no slow-down factor"
    )
    return replace(report, slowdown=None, notes=(*report.notes, note))


def stretched(trajectory: Trajectory, factor: float) -> Trajectory:
    """The same poses with every time step `factor` times longer (from the first sample)."""
    t0 = trajectory.t_s[0]
    return replace(trajectory, t_s=t0 + (trajectory.t_s - t0) * factor)


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
    if rail_m is not None:
        _require_finite(rail_m, t, "rail position")
    solution = solve_trajectory(robot, trajectory, cell_T_scenario, rail_m)
    q = solution.q
    # a target too far for float arithmetic is out of reach by the largest float, not undefined
    reach_excess_m = np.minimum(solution.reach_excess_m, np.finfo(float).max)
    _require_finite(reach_excess_m, t, "distance out of reach")
    unreachable = reach_excess_m > 0
    _require_finite(q[~unreachable], t[~unreachable], "solved axis values")
    stride = fit_stride(t)
    trusted = ~_untrusted(unreachable, stride)
    thresholds = robot.thresholds
    after_end = _motion_after_end(robot, trajectory, settings, stride, cell_T_scenario)
    rows, margins = _rate_rows(robot, t, q, trusted, stride, after_end)

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
        np.where(unreachable, reach_excess_m, -1.0),
        0.0,
        check=Check.REACH,
        axis="tcp",
        worst_value=reach_excess_m,
        limit_value=0.0,
        unit="m",
    )
    rows = with_fitting_branches(rows, robot, t, solution)
    rows += branch_rows(robot, t, solution)
    if settings.lag_s is not None:
        rows += _lag_rows(trajectory, settings, thresholds.rate_margin_fraction)

    rows = sort_rows(rows)
    failing = [r for r in rows if r.severity is Severity.VIOLATION]
    slowdown = _slowdown(failing)
    notes = ()
    if trajectory.ignored_columns:
        notes = (f"columns kept out of the check: {', '.join(trajectory.ignored_columns)}",)
    notes += input_notes(robot, trajectory)
    for kind in unmeasured_rates(trajectory.n_samples):  # null, never a 1 that reads as unused
        for values in margins.values():
            if kind in values:
                values[kind] = None
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


def _motion_after_end(robot, trajectory, settings, stride, cell_T_scenario):
    """Axis velocities and accelerations just after the last sample, each (n_axes,), or None
    when the ends are free.

    Held still (zero) unless the rail follows: then the pose is held and the rail keeps
    following it through its filter, the arm making up the difference. That motion is solved
    on a short held tail (the fit's nodes at the last step) and differentiated from its start.
    """
    if settings.ends is Ends.FREE:
        return None
    n_axes = len(robot.axes)
    zero = np.zeros(n_axes)
    t = trajectory.t_s
    if settings.rail is not RailPolicy.FOLLOW or robot.rail is None or t.size < 2:
        return zero, zero
    step = float(t[-1] - t[-2])
    tail_n = stride * (WINDOW_SAMPLES - 1) + 1
    held = np.arange(1, tail_n)
    t_all = np.concatenate([t, t[-1] + step * held])
    p_all = np.concatenate(
        [trajectory.scenario_p_m, np.repeat(trajectory.scenario_p_m[-1:], held.size, 0)]
    )
    rail_all = rail_positions(
        robot,
        t_all,
        p_all,
        cell_T_scenario,
        settings.rail,
        settings.rail_at_m,
        settings.rail_bandwidth_hz,
    )
    tail = replace(
        trajectory,
        t_s=t_all[t.size - 1 :],
        scenario_p_m=p_all[t.size - 1 :],
        scenario_q_wxyz=np.repeat(trajectory.scenario_q_wxyz[-1:], tail_n, 0),
    )
    solved = solve_trajectory(robot, tail, cell_T_scenario, rail_all[t.size - 1 :])
    if (solved.reach_excess_m > 0).any():
        return zero, zero  # the held pose is out of reach: its rows say so
    rates = time_derivatives(tail.t_s, solved.q, stride=stride)
    return rates.velocity[0], rates.acceleration[0]


def _rate_rows(
    robot: Robot,
    t: np.ndarray,
    q: np.ndarray,
    trusted: np.ndarray,
    stride: int,
    after_end: tuple[np.ndarray, np.ndarray] | None = None,
):
    """Speed, accel and jerk rows and rate margins for every axis.

    q: (N, n_axes). Works block by block (derivatives with a halo of samples on each side, so
    each block's values equal one pass over the whole path) to keep memory bounded on long
    cases. stride: samples between the derivative fit's nodes (fit_stride of the whole path).
    after_end: (velocity, acceleration) of every axis just after the last sample (the arm
    held still: zeros), or None for free ends; at rest ends the first and last samples also
    carry the accel and jerk of joining the path to that motion (junction_rates; before the
    first sample the arm is held still).
    Returns (rows, {axis: {"speed": m, "accel": m, "jerk": m}}).
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
        halo = RATE_HALO_SAMPLES * stride
        lo, hi = max(first - halo, 0), min(last + halo, n)
        rates = time_derivatives(t[lo:hi], q[lo:hi], stride=stride)
        inner = slice(first - lo, last - lo)
        if after_end is not None and (first == 0 or last == n):
            _join_ends(t, rates, first == 0, last == n, hi - lo, stride, after_end)
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
    measured = bool(trusted.any())  # else every rate was masked: no margin, not 1.0
    for (name, kind), (stream, limit) in streams.items():
        rows += stream.finish()
        margins[name][kind.value] = 1.0 - peaks[name, kind] / limit if measured else None
    return rows, margins


def _join_ends(t, rates, at_start, at_end, block_n, stride, after_end) -> None:
    """Put junction_rates into a block's rates (in place) at the path's first / last sample.

    rates: the block's Derivatives, (block_n, n_axes) each, starting at sample 0 if at_start
    and ending at the last sample if at_end.
    """
    h_start, h_end = end_node_steps(t, stride)
    zero = np.zeros(rates.velocity.shape[1])
    joins = []
    if at_start:
        joins.append((0, zero, zero, h_start))
    if at_end:
        joins.append((block_n - 1, *after_end, h_end))
    for i, v_out, a_out, step in joins:
        accel, jerk = junction_rates(
            rates.velocity[i], rates.acceleration[i], rates.jerk[i], v_out, a_out, step
        )
        rates.acceleration[i] = accel
        rates.jerk[i] = jerk


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


def _slowdown(failing: list[Violation]) -> float | None:
    """The slow-down factor before it is measured: 1 when nothing fails, None when no
    violation row is one a stretch clears (checking/slowdown.py), else the scaling law's
    guess (check() replaces it by the factor measured on the stretched case)."""
    if not failing:
        return 1.0
    if not stretch_rows(failing):
        return None
    return stretch_guess(failing) * (1.0 + SLOWDOWN_MARGIN)
