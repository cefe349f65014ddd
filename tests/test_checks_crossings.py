"""The check pipeline on cases whose limit crossings are known analytically.

Each case is made in joint space: the demo arm (rail fixed at home) moves one joint as
q(t) = c + A·sin(ωt), whose derivatives are analytic, A·ω^k·sin(ωt + kπ/2). FK turns it into
a Cartesian path, and ``reachgate.check`` must find every interval where the value or one of
its derivatives is beyond its limit — start and end within two samples of the analytic
crossing times — and report nothing else. Sampling is 250 Hz, even or with ±20 % jitter.

Sources: analytic derivatives of sinusoids and the arcsine of the limit ratio for the
crossing times; the wrist singularity of a spherical wrist at θ5 = 0 (Pieper's geometry);
monotonicity of limits (common practice: a tighter limit can only add violations).
"""

from __future__ import annotations

import copy
import math
import tomllib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import seed as hypothesis_seed
from hypothesis import strategies as st

import reachgate
from reachgate import Check, Severity
from reachgate.checking.pipeline import SLOWDOWN_MARGIN
from reachgate.kinematics.chain import forward
from reachgate.model.robot import robot_from_dict
from reachgate.model.transforms import matrix_to_quat

from conftest import DEMO_ROBOT

RATE_HZ = 250.0
DURATION_S = 6.0
#: Rows must start and end within this many (largest) sample steps of the analytic times.
CROSSING_TOL_SAMPLES = 2
DEG = math.pi / 180.0


#: The analytic cases are windows cut out of endless sinusoids, so they are checked with free
#: ends (DESIGN §11); rest at the ends has its own analytic test (tests/test_ends.py).
WINDOW = reachgate.CheckSettings(ends=reachgate.Ends.FREE)


@pytest.fixture(scope="module")
def demo():
    return reachgate.load_robot(DEMO_ROBOT)


def sample_times(seed: int, jitter: float) -> np.ndarray:
    """(N,) times at RATE_HZ over DURATION_S; each step scaled by U(1 - jitter, 1 + jitter)."""
    rng = np.random.default_rng(seed)
    n = int(DURATION_S * RATE_HZ)
    return np.concatenate([[0.0], np.cumsum(rng.uniform(1 - jitter, 1 + jitter, n) / RATE_HZ)])


def joint_case(robot, t, joint, centre_rad, amplitude_rad, omega_rad_s, phase_rad=0.0):
    """Arm at home except `joint` (0-based arm index) = c + A sin(ωt + φ); rail at home.

    Returns (q (N, n_axes), Trajectory of the FK poses in the cell).
    """
    q = np.tile(robot.home, (t.size, 1))
    q[:, 1 + joint] = centre_rad + amplitude_rad * np.sin(omega_rad_s * t + phase_rad)
    cell_T_tool = forward(robot, q)
    path = reachgate.Trajectory.from_arrays(
        t, cell_T_tool[:, :3, 3], matrix_to_quat(cell_T_tool[:, :3, :3]), name="crossing"
    )
    return q, path


def above(omega, phase, level, t_end):
    """Analytic intervals in [0, t_end] where sin(ωt + phase) > level (|level| < 1)."""
    a = math.asin(level)
    out = []
    m = math.floor((phase - math.pi) / (2 * math.pi)) - 1
    while True:
        lo = (a + 2 * math.pi * m - phase) / omega
        hi = (math.pi - a + 2 * math.pi * m - phase) / omega
        if lo > t_end:
            return out
        if hi > 0:
            out.append((max(lo, 0.0), min(hi, t_end)))
        m += 1


def abs_above(omega, phase, level, t_end):
    """Analytic intervals where |sin(ωt + phase)| > level, sorted."""
    both = above(omega, phase, level, t_end) + above(omega, phase + math.pi, level, t_end)
    return sorted(both)


def assert_rows_match(report, t, expected):
    """Every row of the report is one of `expected` and every expected interval is a row.

    expected: {(check, axis): [(start_s, end_s), ...]} analytic violation intervals.
    """
    tol = CROSSING_TOL_SAMPLES * np.diff(t).max()
    for row in report.violations:
        key = (row.check, row.axis)
        assert row.severity is Severity.VIOLATION and key in expected, f"unexpected row {row}"
    for key, intervals in expected.items():
        rows = sorted(
            (r for r in report.violations if (r.check, r.axis) == key), key=lambda r: r.start_s
        )
        assert len(rows) == len(intervals), f"{key}: {len(rows)} rows, {len(intervals)} expected"
        for row, (start, end) in zip(rows, intervals, strict=True):
            assert abs(row.start_s - start) <= tol, f"{key}: start {row.start_s} vs {start}"
            assert abs(row.end_s - end) <= tol, f"{key}: end {row.end_s} vs {end}"


# --- one crossing kind at a time ---------------------------------------------------------

# (check, arm joint index, derivative order, limit attribute, ω rad/s, peak / limit).
# Peaks of the other derivatives stay below 0.9 of their limits (the near band) and away
# from every other limit, so that nothing else may appear.
RATE_CASES = {
    "speed j1": (Check.SPEED, 0, 1, "vmax_per_s", 1.5, 1.25),
    "accel j4": (Check.ACCEL, 3, 2, "amax_per_s2", 6.0, 1.25),
    "jerk j6": (Check.JERK, 5, 3, "jmax_per_s3", 15.0, 1.25),
}


@pytest.mark.parametrize("jitter", [0.0, 0.2], ids=["even", "jitter20"])
@pytest.mark.parametrize("name", list(RATE_CASES))
def test_rate_limit_crossings_are_found_at_the_analytic_times(demo, name, jitter):
    """Analytic: the k-th derivative of A sin(ωt + φ) is A ω^k sin(ωt + φ + kπ/2); with
    φ = -kπ/2 it is A ω^k sin(ωt), beyond the limit L where |sin(ωt)| > L / (A ω^k)."""
    check, joint, order, attribute, omega, ratio = RATE_CASES[name]
    axis = demo.joints[joint]
    limit = getattr(axis, attribute)
    amplitude = ratio * limit / omega**order
    others = {1: axis.vmax_per_s, 2: axis.amax_per_s2, 3: axis.jmax_per_s3}
    for k, other_limit in others.items():
        if k != order:
            assert amplitude * omega**k < 0.85 * other_limit  # the case's premise
    seed = 500 + 10 * list(RATE_CASES).index(name) + int(10 * jitter)
    t = sample_times(seed, jitter)
    phase = -order * math.pi / 2
    _, path = joint_case(demo, t, joint, demo.home[1 + joint], amplitude, omega, phase)
    report = reachgate.check(demo, path, WINDOW)
    expected = abs_above(omega, 0.0, 1.0 / ratio, t[-1])
    assert_rows_match(report, t, {(check, axis.name): expected})
    assert report.verdict is reachgate.Verdict.FAIL
    peak = amplitude * omega**order
    worst = max(row.worst for row in report.violations)
    for row in report.violations:
        assert row.limit == limit and row.worst > limit
        if 0.0 < row.start_s and row.end_s < t[-1]:  # a whole lobe, peak inside the path
            assert row.worst == pytest.approx(peak, rel=0.005)
    # the slow-down that clears the case: stretching time by s divides the k-th derivative
    # by s^k, so s = (worst / limit)^(1/k)
    # the scaling law, raised by the small margin that puts the stretched worst below the limit
    expected_slowdown = (worst / limit) ** (1.0 / order) * (1.0 + SLOWDOWN_MARGIN)
    assert report.slowdown == pytest.approx(expected_slowdown, rel=1e-9)


@pytest.mark.parametrize(
    ("joint", "centre_deg", "amplitude_deg", "seed"),
    [(4, 95.0, 35.0, 541), (1, -10.0, 35.0, 542)],
    ids=["j5 above 125 deg", "j2 above 20 deg"],
)
def test_joint_range_crossings_are_found_at_the_analytic_times(
    demo, joint, centre_deg, amplitude_deg, seed
):
    """Analytic: c + A sin(ωt) > upper where sin(ωt) > (upper - c) / A (ω = 1 rad/s, slow
    enough that no rate limit is near)."""
    axis = demo.joints[joint]
    t = sample_times(seed, 0.0)
    centre, amplitude = centre_deg * DEG, amplitude_deg * DEG
    assert centre - amplitude > axis.lower + 5 * DEG
    _, path = joint_case(demo, t, joint, centre, amplitude, 1.0)
    report = reachgate.check(demo, path, WINDOW)
    expected = above(1.0, 0.0, (axis.upper - centre) / amplitude, t[-1])
    assert_rows_match(report, t, {(Check.POSITION, axis.name): expected})
    for row in report.violations:
        assert row.limit == axis.upper
        assert row.worst == pytest.approx(centre + amplitude, abs=1e-5)


def test_wrist_singularity_when_j5_passes_through_zero(demo):
    """Spherical wrist: axes 4 and 6 align at θ5 = 0 (wrist bend |θ5|). j5 = 20° - 40° sin(ωt)
    passes through 0; the `singularity` row with axis `wrist` covers |θ5| < wrist_min,
    within two samples of the analytic times."""
    t = sample_times(551, 0.0)
    omega = 0.6
    _, path = joint_case(demo, t, 4, 20.0 * DEG, -40.0 * DEG, omega)
    report = reachgate.check(demo, path, WINDOW)
    rows = [r for r in report.violations if r.check is Check.SINGULARITY]
    assert len(rows) == 2 and all(r.axis == "wrist" for r in rows)  # two passages
    floor = demo.thresholds.wrist_min_rad
    # |20° - 40° sin(ωt)| < 5°: sin(ωt) rises through 15/40 at t0 and 25/40 at t1, then
    # falls back through 25/40 at t2 and 15/40 at t3
    t0, t1 = math.asin(15.0 / 40.0) / omega, math.asin(25.0 / 40.0) / omega
    t2, t3 = (math.pi - omega * t1) / omega, (math.pi - omega * t0) / omega
    first = min(rows, key=lambda r: r.start_s)
    tol = CROSSING_TOL_SAMPLES / RATE_HZ
    assert first.severity is Severity.VIOLATION
    assert abs(first.start_s - t0) <= tol and abs(first.end_s - t1) <= tol
    assert first.worst < 0.2 * DEG  # the path passes through 0 between samples
    assert first.limit == floor
    second = [r for r in rows if r.start_s > t1 + 0.1]
    assert second and abs(second[0].start_s - t2) <= tol and abs(second[0].end_s - t3) <= tol


# --- tightening a limit never turns a fail into a pass ------------------------------------

_DEMO_DATA = tomllib.loads(DEMO_ROBOT.read_text(encoding="utf-8"))
_AXES = ["rail"] + [joint["name"] for joint in _DEMO_DATA["joints"]]


def _scaled_robot(axis_index: int, kind: str, factor: float):
    """The demo robot with one limit tightened by `factor` in (0, 1]: a rate limit scaled,
    or the range shrunk towards home."""
    data = copy.deepcopy(_DEMO_DATA)
    table = data["rail"] if axis_index == 0 else data["joints"][axis_index - 1]
    unit = "m" if axis_index == 0 else "deg"
    if kind == "range":
        lo, hi = table[f"range_{unit}"]
        home = table.get(f"home_{unit}", 0.0)
        table[f"range_{unit}"] = [home - factor * (home - lo), home + factor * (hi - home)]
    else:
        key = {"speed": f"vmax_{unit}_s", "accel": f"amax_{unit}_s2", "jerk": f"jmax_{unit}_s3"}
        table[key[kind]] *= factor
    return robot_from_dict(data, source="tightened demo")


#: Per arm joint: amplitude (deg), ω (rad/s), phase (rad). Each joint uses 40-80 % of its
#: speed and accel limits and 20-40 % of its jerk limit; the case passes as it is.
BUSY_MOTION = [(20, 3.5, 0.0), (15, 4.0, 1.0), (15, 3.0, 2.0), (25, 4.0, 3.0), (20, 3.0, 4.0),
               (25, 5.0, 5.0)]  # fmt: skip


@pytest.fixture(scope="module")
def busy_path(demo):
    """Every arm joint moving as BUSY_MOTION, 4 s at 250 Hz with ±20 % jitter."""
    t = sample_times(561, 0.2)[:1000]
    q = np.tile(demo.home, (t.size, 1))
    for i, (amplitude_deg, omega, phase) in enumerate(BUSY_MOTION):
        q[:, 1 + i] += amplitude_deg * DEG * np.sin(omega * t + phase)
    cell_T_tool = forward(demo, q)
    path = reachgate.Trajectory.from_arrays(
        t, cell_T_tool[:, :3, 3], matrix_to_quat(cell_T_tool[:, :3, :3]), name="busy"
    )
    assert reachgate.check(demo, path, WINDOW).passed  # the premise: tightening starts from a pass
    return path


@hypothesis_seed(571)
@settings(max_examples=40, deadline=None, database=None)
@given(
    axis_index=st.integers(min_value=0, max_value=len(_AXES) - 1),
    kind=st.sampled_from(["range", "speed", "accel", "jerk"]),
    loose=st.floats(min_value=0.05, max_value=1.0),
    tighter_by=st.floats(min_value=0.05, max_value=1.0),
)
def test_tightening_a_limit_never_turns_a_fail_into_a_pass(
    busy_path, axis_index, kind, loose, tighter_by
):
    """Common practice (monotonicity): with one limit tightened further, a failing case still
    fails, and the margin of that rate limit can only shrink."""
    tight = loose * tighter_by
    loose_report = reachgate.check(_scaled_robot(axis_index, kind, loose), busy_path, WINDOW)
    tight_report = reachgate.check(_scaled_robot(axis_index, kind, tight), busy_path, WINDOW)
    if not loose_report.passed:
        assert not tight_report.passed
    if kind != "range":
        name = _AXES[axis_index]
        assert tight_report.margins[name][kind] <= loose_report.margins[name][kind]
