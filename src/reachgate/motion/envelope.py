"""Amplitude–frequency envelope of sinusoidal motion around an operating pose (DESIGN §5).

For each direction (translation along cell x, y, z; rotation about the TCP's own x, y, z axes,
i.e. roll, pitch, yaw) and each frequency f, the envelope is the largest amplitude A for which
the TCP motion A · w(t) · sin(2πft) about the operating pose passes the real check pipeline
(`reachgate.check`) without a `violation` row in its steady part. w ramps from 0 to 1 over
RAMP_PERIODS periods in and back to 0 over as many out, with a smoothstep whose first three
derivatives vanish at both ends, so every test starts and ends at rest and the steady part is a
pure sinusoid up to its jerk. Rows lying wholly inside a ramp or in the rests between tests are
not counted: they belong to starting and stopping the sinusoid, not to the sinusoid itself.

A is found by bisection on log A between a small and a large amplitude, to the relative
tolerance REL_TOL. All (direction, frequency) tests of one bisection step are joined into one
trajectory, separated by rests, and checked in a single call, so the whole envelope takes a
dozen check calls.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from enum import Enum

import numpy as np

from reachgate.checking.intervals import Check, Severity, Violation
from reachgate.checking.pipeline import CheckSettings, Placement, check
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ, RailPolicy
from reachgate.errors import ReachgateError
from reachgate.kinematics.chain import forward
from reachgate.kinematics.numeric import COARSE_STRIDE
from reachgate.kinematics.path_ik import SolverKind, solver_kind
from reachgate.model.robot import Robot
from reachgate.model.trajectory import Trajectory
from reachgate.model.transforms import matrix_to_quat, matrix_to_rpy, transform_from_xyz_rpy
from reachgate.version import __version__

#: Bisection stops when the failing amplitude is within this factor of the passing one.
REL_TOL = 0.01
#: Ramp in and out, in periods. Its accel and jerk overshoot the steady sinusoid's inside the
#: ramp (by 15 % and 55 % for one period, measured); those rows are not counted (see above).
RAMP_PERIODS = 1
#: Steady periods between the ramps: every phase of the sinusoid is sampled twice.
STEADY_PERIODS = 2
#: Samples per period, a multiple of 4 so peaks and zero crossings fall on samples. At 96 the
#: pipeline's derivative fits (reachgate.derivatives) read a sampled sine's jerk 0.25 % low and
#: its speed and accel within 1e-5 (measured); 64 would give 0.56 % on jerk.
SAMPLES_PER_PERIOD = 96
#: Arms on the numeric solver: its first pass solves every COARSE_STRIDE-th sample in sequence,
#: so a stride must stay a small part of a period (a sixth: 2·sin(π/6) = 1, the joints move at
#: most one amplitude between two solved samples). With 96 samples, large rotations came out
#: wound by a full turn (measured on robots/demo_gantry.toml, roll 170 deg at 0.1 Hz).
NUMERIC_SAMPLES_PER_PERIOD = 6 * COARSE_STRIDE
#: A test whose first sample's axis values differ from the operating pose's by more than this
#: (rad or m) inherited a wound joint, another branch or an unsettled rail from the test before
#: it in the joined trajectory; it is checked again on its own.
CARRY_OVER_TOL = 1e-2
#: Rest samples kept at the neighbouring test's step, more than one derivative window (7).
REST_EDGE_SAMPLES = 8
#: Steps in a rest change by at most this factor from one to the next (the derivative fits are
#: tested accurate under ±20 % step jitter).
STEP_GROWTH = 1.2
#: follow: a rest lasts this many filter time constants 1/(2π·bandwidth), so the rail has
#: settled to well below 1e-4 of the last test's motion before the next one starts ...
SETTLE_TIME_CONSTANTS = 12.0
#: ... sampled this finely (steps per time constant).
SETTLE_STEPS_PER_TIME_CONSTANT = 16
#: Smallest amplitudes tried; an envelope point failing even these is reported as 0.
MIN_AMPLITUDE_M = 1e-6
MIN_AMPLITUDE_RAD = 1e-5
#: Largest rotation amplitude tried: half a turn either way.
MAX_AMPLITUDE_RAD = math.pi
#: Most frequencies one envelope may ask for (each adds a test to every bisection step).
MAX_FREQUENCIES = 200
DEFAULT_FREQ_RANGE_HZ = (0.1, 10.0)
#: Six frequencies per decade over the default two decades.
DEFAULT_FREQ_COUNT = 13


class Direction(Enum):
    """Direction of the sinusoid: translations along cell axes, rotations about TCP axes."""

    X = "x"
    Y = "y"
    Z = "z"
    ROLL = "roll"
    PITCH = "pitch"
    YAW = "yaw"

    @property
    def is_rotation(self) -> bool:
        return self in (Direction.ROLL, Direction.PITCH, Direction.YAW)

    @property
    def index(self) -> int:
        """0, 1, 2: which cell axis (translations) or TCP axis (rotations)."""
        return list(Direction).index(self) % 3

    @property
    def unit(self) -> str:
        return "rad" if self.is_rotation else "m"


ALL_DIRECTIONS = tuple(Direction)


@dataclass(frozen=True, eq=False)
class DirectionEnvelope:
    """The envelope along one direction, arrays of shape (F,).

    amplitudes: largest amplitude verified to pass, m or rad (0 where even the smallest tried
    fails); bounded: False where even the largest tried passes (the amplitude is then only a
    lower bound); limiting_check / limiting_axis: the row that fails just above the amplitude
    ('' where unbounded).
    """

    direction: Direction
    frequencies_hz: np.ndarray
    amplitudes: np.ndarray
    bounded: np.ndarray
    limiting_check: tuple[str, ...]
    limiting_axis: tuple[str, ...]

    def as_dict(self) -> dict:
        return {
            "direction": self.direction.value,
            "unit": self.direction.unit,
            "points": [
                {
                    "frequency_hz": float(f),
                    "amplitude": float(a),
                    "bounded": bool(b),
                    "check": c or None,
                    "axis": x or None,
                }
                for f, a, b, c, x in zip(
                    self.frequencies_hz,
                    self.amplitudes,
                    self.bounded,
                    self.limiting_check,
                    self.limiting_axis,
                    strict=True,
                )
            ],
        }


@dataclass(frozen=True, eq=False)
class Envelope:
    """Result of `envelope`: one DirectionEnvelope per direction asked for.

    cell_T_operating: (4, 4) operating TCP pose in the cell; checks_run: check calls used.
    """

    robot: str
    cell_T_operating: np.ndarray
    rail: RailPolicy
    rel_tol: float
    directions: tuple[DirectionEnvelope, ...]
    checks_run: int
    samples_per_period: int
    settings: dict = field(default_factory=dict)  # the options that shaped it, SI

    def along(self, direction: Direction) -> DirectionEnvelope:
        for item in self.directions:
            if item.direction is direction:
                return item
        raise KeyError(direction)

    def as_dict(self) -> dict:
        return {
            "tool_version": __version__,
            "robot": self.robot,
            "pose": {
                "xyz_m": [float(v) for v in self.cell_T_operating[:3, 3]],
                "rpy_deg": [float(v) for v in np.degrees(matrix_to_rpy(self.cell_T_operating))],
            },
            "rail": self.rail.value,
            "settings": self.settings,
            "rel_tol": self.rel_tol,
            "signal": {
                "ramp_periods": RAMP_PERIODS,
                "steady_periods": STEADY_PERIODS,
                "samples_per_period": self.samples_per_period,
            },
            "directions": [d.as_dict() for d in self.directions],
        }

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.as_dict(), indent=indent)


# --- option parsing ------------------------------------------------------------------------


def parse_pose(text: str) -> np.ndarray:
    """cell_T_tcp (4, 4) from "x,y,z,roll,pitch,yaw" in m and deg (the --pose option)."""
    try:
        values = [float(p) for p in text.split(",")]
    except ValueError:
        values = []
    if len(values) != 6 or not all(math.isfinite(v) for v in values):
        raise ReachgateError(
            f"--pose: expected six numbers 'x,y,z,roll,pitch,yaw' (m, deg), got {text!r}"
        )
    return transform_from_xyz_rpy(values[:3], np.radians(values[3:]))


def parse_directions(text: str) -> tuple[Direction, ...]:
    """Directions from a comma list such as "x,z,yaw" (the --axes option)."""
    names = [p.strip().lower() for p in text.split(",")]
    known = ", ".join(d.value for d in Direction)
    chosen: list[Direction] = []
    for name in names:
        try:
            direction = Direction(name)
        except ValueError:
            raise ReachgateError(
                f"--axes: unknown direction {name!r} in {text!r}; choose from {known}"
            ) from None
        if direction in chosen:
            raise ReachgateError(f"--axes: direction {name!r} is given twice in {text!r}")
        chosen.append(direction)
    return tuple(chosen)


def frequencies_from_range(text: str, count: int) -> np.ndarray:
    """Log-spaced frequencies (count,) in Hz from "low,high" (the --freq-range option)."""
    try:
        values = [float(p) for p in text.split(",")]
    except ValueError:
        values = []
    if len(values) != 2 or not all(math.isfinite(v) and v > 0 for v in values):
        raise ReachgateError(
            f"--freq-range: expected two positive frequencies 'low,high' in Hz, got {text!r}"
        )
    low, high = values
    if not low < high:
        raise ReachgateError(f"--freq-range: low {low:g} Hz must be below high {high:g} Hz")
    if not 2 <= count <= MAX_FREQUENCIES:
        raise ReachgateError(f"--freqs: must be between 2 and {MAX_FREQUENCIES}, got {count}")
    return np.geomspace(low, high, count)


# --- the test signal -----------------------------------------------------------------------


def unit_sine(n_periods_ramp: int, n_periods_steady: int, per_period: int) -> np.ndarray:
    """Ramped unit sinusoid on samples k = 0..M, M = (2·ramp + steady)·per_period -> (M + 1,).

    w(k)·sin(2πk/per_period), w the smoothstep u⁴(35 - 84u + 70u² - 20u³) of the fraction u
    of the first (and, mirrored, the last) ramp periods: w', w'' and w''' vanish at u = 0 and 1.
    """
    total = (2 * n_periods_ramp + n_periods_steady) * per_period
    k = np.arange(total + 1)
    ramp = n_periods_ramp * per_period
    u = np.clip(np.minimum(k, total - k) / ramp, 0.0, 1.0)
    w = u**4 * (35.0 - 84.0 * u + 70.0 * u**2 - 20.0 * u**3)
    return w * np.sin(2.0 * np.pi * (k % per_period) / per_period)


def _geometric_steps(dt_from: float, dt_to: float) -> np.ndarray:
    """Steps strictly between dt_from and dt_to, each within STEP_GROWTH of the next."""
    n = math.ceil(abs(math.log(dt_to / dt_from)) / math.log(STEP_GROWTH))
    return dt_from * (dt_to / dt_from) ** (np.arange(1, n) / n) if n > 1 else np.empty(0)


def rest_steps(dt_from: float, dt_to: float, settle_s: float) -> np.ndarray:
    """Time steps of a rest between two tests with steps dt_from and dt_to, s.

    The step changes geometrically; with settle_s > 0 the rest holds at least that long at
    a step of settle_s / (SETTLE_TIME_CONSTANTS · SETTLE_STEPS_PER_TIME_CONSTANT).
    """
    edge_from = np.full(REST_EDGE_SAMPLES, dt_from)
    edge_to = np.full(REST_EDGE_SAMPLES, dt_to)
    if settle_s <= 0:
        return np.concatenate([edge_from, _geometric_steps(dt_from, dt_to), edge_to])
    dt_hold = settle_s / (SETTLE_TIME_CONSTANTS * SETTLE_STEPS_PER_TIME_CONSTANT)
    hold = np.full(math.ceil(settle_s / dt_hold), dt_hold)
    return np.concatenate(
        [
            edge_from,
            _geometric_steps(dt_from, dt_hold),
            hold,
            _geometric_steps(dt_hold, dt_to),
            edge_to,
        ]
    )


def _axis_rotations(axis_index: np.ndarray, angle_rad: np.ndarray) -> np.ndarray:
    """Rotations about principal axes, (N,) axis indices 0..2 and (N,) angles -> (N, 3, 3)."""
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    n = angle_rad.shape[0]
    R = np.zeros((n, 3, 3))
    i = axis_index
    j, k = (i + 1) % 3, (i + 2) % 3
    rows = np.arange(n)
    R[rows, i, i] = 1.0
    R[rows, j, j] = c
    R[rows, k, k] = c
    R[rows, j, k] = -s
    R[rows, k, j] = s
    return R


@dataclass(frozen=True, eq=False)
class _Tests:
    """The (direction, frequency) tests of an envelope, flattened to arrays of shape (S,)."""

    direction: np.ndarray  # indices into the directions tuple
    frequency_hz: np.ndarray
    dt_s: np.ndarray


class _Runner:
    """Builds joined test trajectories and checks them; counts the check calls."""

    def __init__(
        self,
        robot: Robot,
        scenario_T_operating: np.ndarray,
        directions: tuple[Direction, ...],
        tests: _Tests,
        settings: CheckSettings,
        settle_s: float,
        q_operating: np.ndarray,
    ) -> None:
        self.robot, self.scenario_T_operating = robot, scenario_T_operating
        self.directions, self.tests = directions, tests
        self.settings, self.settle_s = settings, settle_s
        self.q_operating = q_operating
        self.axis_index = {name: i for i, name in enumerate(robot.axis_names)}
        self.per_period = samples_per_period(robot)
        self.shape = unit_sine(RAMP_PERIODS, STEADY_PERIODS, self.per_period)
        self.calls = 0

    def _assemble(self, which: np.ndarray, amplitudes: np.ndarray):
        """Joined trajectory of tests `which` (k,) at amplitudes (k,).

        -> (t (N,), scenario_T_tool (N, 4, 4), steady windows (k, 2) in s, first samples (k,)).
        """
        dts = self.tests.dt_s[which]
        steps = [np.full(REST_EDGE_SAMPLES, dts[0])]
        values = [np.zeros(REST_EDGE_SAMPLES)]
        owner = [np.full(REST_EDGE_SAMPLES, -1)]
        first_index = []
        count = 1 + REST_EDGE_SAMPLES  # sample 0 is the opening rest
        for slot, dt in enumerate(dts):
            first_index.append(count)
            steps.append(np.full(self.shape.size, dt))
            values.append(self.shape * amplitudes[slot])
            owner.append(np.full(self.shape.size, slot))
            count += self.shape.size
            dt_next = dts[slot + 1] if slot + 1 < dts.size else dt
            gap = rest_steps(dt, dt_next, self.settle_s)
            steps.append(gap)
            values.append(np.zeros(gap.size))
            owner.append(np.full(gap.size, -1))
            count += gap.size
        t = np.concatenate([[0.0], np.cumsum(np.concatenate(steps))])
        value = np.concatenate([[0.0], *values])
        slot_of = np.concatenate([[-1], *owner])
        first = np.asarray(first_index)
        steady = np.column_stack(
            [
                t[first + RAMP_PERIODS * self.per_period],
                t[first + (RAMP_PERIODS + STEADY_PERIODS) * self.per_period],
            ]
        )
        kinds = np.array([d.is_rotation for d in self.directions])
        axis = np.array([d.index for d in self.directions])
        sample_dir = np.where(slot_of >= 0, self.tests.direction[which][slot_of], 0)
        moving = slot_of >= 0
        rotating = moving & kinds[sample_dir]
        translating = moving & ~kinds[sample_dir]
        n = t.size
        scenario_T_tool = np.broadcast_to(self.scenario_T_operating, (n, 4, 4)).copy()
        shift = np.zeros((n, 3))
        shift[translating, axis[sample_dir[translating]]] = value[translating]
        scenario_T_tool[:, :3, 3] += shift
        if rotating.any():
            turn = _axis_rotations(axis[sample_dir[rotating]], value[rotating])
            scenario_T_tool[rotating, :3, :3] = self.scenario_T_operating[:3, :3] @ turn
        return t, scenario_T_tool, steady, first

    def run(
        self, which: np.ndarray, amplitudes: np.ndarray
    ) -> tuple[np.ndarray, list[Violation | None]]:
        """Check tests `which` (k,) at amplitudes (k,) -> (passed (k,), limiting row or None)."""
        t, scenario_T_tool, steady, first = self._assemble(which, amplitudes)
        rotations = matrix_to_quat(scenario_T_tool[:, :3, :3])
        path = Trajectory.from_arrays(t, scenario_T_tool[:, :3, 3], rotations, name="envelope")
        report = check(self.robot, path, self.settings)
        self.calls += 1
        worst: list[Violation | None] = [None] * which.size
        worst_excess = np.full(which.size, -np.inf)
        for row in report.violations:
            if row.severity is not Severity.VIOLATION:
                continue
            hit = np.flatnonzero((steady[:, 0] <= row.end_s) & (row.start_s <= steady[:, 1]))
            excess = self._relative_excess(row)
            for slot in hit[worst_excess[hit] < excess]:
                worst[slot], worst_excess[slot] = row, excess
        # Tests that started from a state left behind by an earlier one are checked again,
        # joined among themselves; the first test of a run starts from the path's start, so it
        # is never carried and the recursion ends.
        carried = np.abs(report.solution.q[first] - self.q_operating).max(axis=1) > CARRY_OVER_TOL
        carried[0] = False
        again = np.flatnonzero(carried)
        if again.size:
            again_passed, again_rows = self.run(which[again], amplitudes[again])
            for slot, ok, row in zip(again, again_passed, again_rows, strict=True):
                worst[slot] = None if ok else row
        return np.array([w is None for w in worst]), worst

    def _relative_excess(self, row: Violation) -> float:
        """How far a row lies beyond its limit, as a fraction of the room the limit allowed."""
        if row.check in (Check.SPEED, Check.ACCEL, Check.JERK, Check.LAG):
            return abs(row.worst) / row.limit - 1.0
        if row.check is Check.POSITION:
            q0 = self.q_operating[self.axis_index[row.axis]]
            room = abs(row.limit - q0)
            return abs(row.worst - q0) / room - 1.0 if room > 0 else math.inf
        if row.check is Check.SINGULARITY:
            return row.limit / row.worst - 1.0 if row.worst > 0 else math.inf
        return math.inf  # reach, branch: the motion cannot be followed at all


def samples_per_period(robot: Robot) -> int:
    """Samples per period of the test sinusoid for this robot's IK solver."""
    if solver_kind(robot) is SolverKind.NUMERIC:
        return max(SAMPLES_PER_PERIOD, NUMERIC_SAMPLES_PER_PERIOD)
    return SAMPLES_PER_PERIOD


def translation_bound_m(robot: Robot, rail: RailPolicy) -> float:
    """Largest translation amplitude tried, m.

    Every TCP position lies within L of the arm base, L = Σ|a| + Σ|d| (prismatic joints at
    their farthest range end) + the tool and chain-base offsets. A target 2L from the
    operating point is then out of reach for a fixed base; a following rail adds its length
    (half of it to L).
    """
    chain = robot.chain
    reach = float(np.sum(np.abs(chain.a_m)))
    for joint, d in zip(robot.joints, chain.d_m, strict=True):
        reach += abs(d) + (0.0 if joint.is_revolute else max(abs(joint.lower), abs(joint.upper)))
    reach += float(np.linalg.norm(robot.flange_T_tool[:3, 3]))
    reach += float(np.linalg.norm(chain.base_T_chain[:3, 3]))
    if rail is RailPolicy.FOLLOW and robot.rail is not None:
        reach += 0.5 * (robot.rail.upper - robot.rail.lower)
    return 2.0 * reach


def home_pose(robot: Robot) -> np.ndarray:
    """cell_T_tcp (4, 4) at the home configuration (rail at its home)."""
    return forward(robot, robot.home[None])[0]


#: The check options an envelope uses (the rest concern a commanded path's delay).
_ENVELOPE_SETTINGS = ("place_xyz_m", "place_rpy_deg", "rail", "rail_at_m", "rail_bandwidth_hz")


def envelope(
    robot: Robot,
    *,
    cell_T_operating: np.ndarray | None = None,
    directions: tuple[Direction, ...] = ALL_DIRECTIONS,
    frequencies_hz: np.ndarray | None = None,
    rail: RailPolicy = RailPolicy.FIXED,
    rel_tol: float = REL_TOL,
    placement: Placement | None = None,
    rail_at_m: float | None = None,
    rail_bandwidth_hz: float = DEFAULT_BANDWIDTH_HZ,
) -> Envelope:
    """Amplitude–frequency envelope around an operating pose (default: the home TCP pose).

    cell_T_operating: (4, 4) TCP pose in the cell; frequencies_hz: (F,) positive, default
    DEFAULT_FREQ_COUNT log-spaced over DEFAULT_FREQ_RANGE_HZ. placement: the scenario frame in
    the cell (as check's --place): the directions x, y, z are then the scenario's axes (default
    the cell's). rail_at_m, rail_bandwidth_hz: as in CheckSettings. Raises ReachgateError when
    the arm cannot even hold the operating pose.
    """
    if rail is RailPolicy.FOLLOW and robot.rail is None:
        raise ReachgateError(f"--rail: robot {robot.name!r} ({robot.source}) has no rail")
    if not directions:
        raise ReachgateError("--axes: give at least one direction")
    if not (math.isfinite(rel_tol) and 0 < rel_tol < 1):
        raise ReachgateError(f"rel_tol: must lie between 0 and 1, got {rel_tol!r}")
    pose = home_pose(robot) if cell_T_operating is None else np.asarray(cell_T_operating, float)
    if frequencies_hz is None:
        frequencies_hz = np.geomspace(*DEFAULT_FREQ_RANGE_HZ, DEFAULT_FREQ_COUNT)
    frequencies_hz = np.asarray(frequencies_hz, dtype=float)
    if frequencies_hz.ndim != 1 or not np.all(np.isfinite(frequencies_hz) & (frequencies_hz > 0)):
        raise ReachgateError("frequencies must be a (F,) array of positive numbers in Hz")
    placement = Placement() if placement is None else placement
    settings = CheckSettings(
        placement=placement, rail=rail, rail_at_m=rail_at_m, rail_bandwidth_hz=rail_bandwidth_hz
    )
    settle_s = 0.0
    if rail is RailPolicy.FOLLOW:
        settle_s = SETTLE_TIME_CONSTANTS / (2.0 * math.pi * rail_bandwidth_hz)
    # The test paths are scenario paths: around the operating pose seen from the scenario frame.
    scenario_T_operating = np.linalg.inv(placement.cell_T_scenario()) @ pose

    q_operating = _hold_operating_pose(robot, scenario_T_operating, settings)
    n_f = frequencies_hz.size
    tests = _Tests(
        direction=np.repeat(np.arange(len(directions)), n_f),
        frequency_hz=np.tile(frequencies_hz, len(directions)),
        dt_s=np.tile(1.0 / (frequencies_hz * samples_per_period(robot)), len(directions)),
    )
    rotation = np.array([directions[i].is_rotation for i in tests.direction])
    low = np.where(rotation, MIN_AMPLITUDE_RAD, MIN_AMPLITUDE_M)
    high = np.where(rotation, MAX_AMPLITUDE_RAD, translation_bound_m(robot, rail))
    runner = _Runner(
        robot, scenario_T_operating, directions, tests, settings, settle_s, q_operating
    )

    # Bisection on log amplitude; the bracket ends are checked only if the search never moves
    # off them, which spares checking absurd amplitudes in the common case.
    low_passed = np.zeros(low.size, bool)
    high_failed = np.zeros(low.size, bool)
    limiting: list[Violation | None] = [None] * low.size
    while True:
        active = np.flatnonzero(high / low > 1.0 + rel_tol)
        if active.size == 0:
            break
        middle = np.sqrt(low[active] * high[active])
        passed, rows = runner.run(active, middle)
        low[active[passed]] = middle[passed]
        low_passed[active[passed]] = True
        high[active[~passed]] = middle[~passed]
        high_failed[active[~passed]] = True
        for slot in np.flatnonzero(~passed):
            limiting[active[slot]] = rows[slot]
    amplitudes = low.copy()
    bounded = np.ones(low.size, bool)
    check_low, check_high = np.flatnonzero(~low_passed), np.flatnonzero(~high_failed)
    if check_low.size or check_high.size:
        which = np.concatenate([check_low, check_high])
        start = np.where(rotation, MIN_AMPLITUDE_RAD, MIN_AMPLITUDE_M)[check_low]
        top = high[check_high]
        passed, rows = runner.run(which, np.concatenate([start, top]))
        for slot, index in enumerate(which):
            at_bottom = slot < check_low.size
            if passed[slot] and not at_bottom:
                amplitudes[index], bounded[index] = top[slot - check_low.size], False
            elif not passed[slot]:
                limiting[index] = rows[slot]
                if at_bottom:
                    amplitudes[index] = 0.0

    results = []
    for i, direction in enumerate(directions):
        part = slice(i * n_f, (i + 1) * n_f)
        rows_here = limiting[part]
        results.append(
            DirectionEnvelope(
                direction=direction,
                frequencies_hz=frequencies_hz.copy(),
                amplitudes=amplitudes[part],
                bounded=bounded[part],
                limiting_check=tuple("" if r is None else r.check.value for r in rows_here),
                limiting_axis=tuple("" if r is None else r.axis for r in rows_here),
            )
        )
    return Envelope(
        robot=robot.name,
        cell_T_operating=pose,
        rail=rail,
        rel_tol=rel_tol,
        directions=tuple(results),
        checks_run=runner.calls + 1,
        samples_per_period=runner.per_period,
        settings={k: v for k, v in settings.as_dict().items() if k in _ENVELOPE_SETTINGS},
    )


def _hold_operating_pose(robot: Robot, pose: np.ndarray, settings: CheckSettings) -> np.ndarray:
    """Check that the arm can hold the pose at rest; -> its axis values (n_axes,)."""
    n = 4 * REST_EDGE_SAMPLES
    t = np.linspace(0.0, 1.0, n)
    still = np.broadcast_to(pose, (n, 4, 4))
    path = Trajectory.from_arrays(
        t, still[:, :3, 3], matrix_to_quat(still[:, :3, :3]), name="operating pose"
    )
    report = check(robot, path, settings)
    failing = [r for r in report.violations if r.severity is Severity.VIOLATION]
    if failing:
        row = failing[0]
        raise ReachgateError(
            f"--pose: the arm cannot hold the operating pose at rest ({row.check.value} on "
            f"{row.axis}: {row.worst:.6g} against the limit {row.limit:.6g} {row.unit})"
        )
    return report.solution.q[0]
