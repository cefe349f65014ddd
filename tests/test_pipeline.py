"""The check pipeline's own invariants: chunking, rail policies, slow-down, margins."""

from __future__ import annotations

import numpy as np
import pytest

import reachgate
from reachgate.checking.pipeline import stretched
from reachgate.checking.rail import RailPolicy, first_order_lowpass, follow_filter
from reachgate.checking.slowdown import SLOWDOWN_RTOL, stretch_guess, stretch_rows
from reachgate.kinematics.path_ik import solve_trajectory

from conftest import DEMO_CASES, DEMO_ROBOT


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


def sway_path(duration_s=8.0, rate_hz=250.0, amplitude_m=0.1, freq_hz=0.5, seed=5):
    rng = np.random.default_rng(seed)
    t = np.cumsum(np.r_[0.0, rng.uniform(0.8, 1.2, int(duration_s * rate_hz)) / rate_hz])
    p = np.column_stack(
        [
            2.9 + amplitude_m * np.sin(2 * np.pi * freq_hz * t),
            0.2 * np.sin(2 * np.pi * 0.2 * t),
            np.full(t.size, 1.7),
        ]
    )
    rpy = np.column_stack([np.zeros_like(t), 0.1 * np.sin(2 * np.pi * 0.3 * t), np.zeros_like(t)])
    return reachgate.Trajectory.from_arrays(t, p, rpy_rad=rpy, name="sway")


def test_chunked_solution_equals_one_solve(robot):
    path = sway_path()
    place = np.eye(4)
    rail = np.full(path.n_samples, robot.rail.home)
    whole = solve_trajectory(robot, path, place, rail, chunk_samples=10**9)
    chunked = solve_trajectory(robot, path, place, rail, chunk_samples=97)
    np.testing.assert_array_equal(whole.q, chunked.q)
    for kind in whole.measures:
        np.testing.assert_array_equal(whole.measures[kind], chunked.measures[kind])


@pytest.mark.parametrize("jitter", [0.0, 0.2])
def test_first_order_lowpass_matches_the_analytic_step_and_ramp_responses(jitter):
    """Analytic: a ramp u = r t from rest gives y = r (t - τ (1 - e^(-t/τ))) (linear ODE)."""
    rng = np.random.default_rng(21)
    t = np.cumsum(np.r_[0.0, rng.uniform(1 - jitter, 1 + jitter, 5000) * 1e-3])
    if jitter == 0.0:
        t = np.arange(5001) * 1e-3
    tau = 0.07
    y = first_order_lowpass(t, 0.3 * t, tau)
    np.testing.assert_allclose(y, 0.3 * (t - tau * (1 - np.exp(-t / tau))), atol=1e-12)


def test_follow_filter_has_its_minus_3_db_point_at_the_bandwidth():
    """Two equal first-order stages: |H(f_bw)| = 1/sqrt(2) by construction (filter algebra)."""
    bandwidth = 0.5
    t = np.arange(0, 60, 1e-3)
    gains = {}
    for f in (bandwidth, 0.05, 5.0):
        y = follow_filter(t, np.sin(2 * np.pi * f * t), bandwidth)
        gains[f] = np.ptp(y[t > 40]) / 2
    corner = bandwidth / np.sqrt(np.sqrt(2) - 1)  # of each stage
    for f, gain in gains.items():
        assert gain == pytest.approx(1 / (1 + (f / corner) ** 2), rel=2e-3)
    assert gains[bandwidth] == pytest.approx(1 / np.sqrt(2), rel=2e-3)


def test_rail_follow_takes_the_slow_motion_and_fixed_holds_still(robot):
    path = sway_path(amplitude_m=1.0, freq_hz=0.05, duration_s=20)
    follow = reachgate.check(robot, path, reachgate.CheckSettings(rail=RailPolicy.FOLLOW))
    fixed = reachgate.check(robot, path, reachgate.CheckSettings(rail_at_m=2.5))
    rail_follow, rail_fixed = follow.solution.q[:, 0], fixed.solution.q[:, 0]
    assert np.ptp(rail_fixed) == 0.0 and rail_fixed[0] == 2.5
    assert np.ptp(rail_follow) > 1.5  # the 2 m sway mostly goes to the rail


SLOWDOWN_SETTINGS = {
    "follow+lag": dict(rail=RailPolicy.FOLLOW, lag_s=0.05),
    "fixed": dict(rail=RailPolicy.FIXED),
    "follow 0.4 Hz": dict(rail=RailPolicy.FOLLOW, rail_bandwidth_hz=0.4),
}


@pytest.mark.parametrize(
    ("case", "setting"),
    [(p.stem, "follow+lag") for p in sorted(DEMO_CASES.glob("approach_*.csv"))]
    + [
        ("approach_gusty", "fixed"),
        ("approach_rushed", "fixed"),
        ("approach_gusty", "follow 0.4 Hz"),
    ],
)
def test_the_slowdown_factor_itself_clears_every_speed_accel_jerk_and_lag_row(robot, case, setting):
    """Stretching time by exactly the reported factor leaves no speed, accel, jerk or lag
    violation, and stretching by a little less (the search's tolerance, twice) leaves one:
    the factor is the smallest, measured on the real stretched check (bracketing and
    bisection). Fixed rail: derivatives scale by k, k², k³ (analytic), so the factor is the
    scaling law's. Rail follow at 0.4 Hz: the stretch changes what the rail filter passes;
    this case's only rows are accel and jerk rows, and the fixed rounds of raising the law's
    factor used to give up (null)."""
    path = reachgate.load_trajectory(DEMO_CASES / f"{case}.csv")
    settings = reachgate.CheckSettings(**SLOWDOWN_SETTINGS[setting])
    report = reachgate.check(robot, path, settings)
    assert stretch_rows(report.violations), "the case's premise: rows a stretch can clear"
    assert report.slowdown is not None and report.slowdown > 1.0
    again = reachgate.check(robot, stretched(path, report.slowdown), settings)
    assert stretch_rows(again.violations) == []
    assert again.slowdown in (1.0, None)  # None: only rows no stretch clears are left
    short = reachgate.check(
        robot, stretched(path, report.slowdown / (1 + 2 * SLOWDOWN_RTOL)), settings
    )
    assert stretch_rows(short.violations)
    if setting == "fixed":
        assert report.slowdown == pytest.approx(stretch_guess(report.violations), rel=1e-5)


def test_margins_agree_with_violations(robot):
    report = reachgate.check(robot, sway_path(amplitude_m=0.3, freq_hz=1.2))
    for row in report.violations:
        if row.severity is reachgate.Severity.VIOLATION and row.axis in report.margins:
            assert report.margins[row.axis][row.check.value] < 0


def test_placement_along_the_rail_goes_to_the_rail_when_it_follows(robot):
    """A placement shifted by d along the rail axis moves the carriage by exactly d and leaves
    the arm's joints unchanged (the follow filter is linear with unit DC gain, starting at rest
    on the first sample; analytic invariance)."""
    path = sway_path()
    follow = reachgate.CheckSettings(rail=RailPolicy.FOLLOW)
    base = reachgate.check(robot, path, follow)
    moved = reachgate.check(
        robot,
        path,
        reachgate.CheckSettings(
            rail=RailPolicy.FOLLOW, placement=reachgate.Placement.parse("0.5,0,0,0,0,0")
        ),
    )
    np.testing.assert_allclose(moved.solution.q[:, 0], base.solution.q[:, 0] + 0.5, atol=1e-9)
    np.testing.assert_allclose(moved.solution.q[:, 1:], base.solution.q[:, 1:], atol=1e-9)


def test_rate_checks_in_blocks_equal_one_pass(robot, monkeypatch):
    import reachgate.checking.pipeline as check_module

    path = sway_path(amplitude_m=0.3, freq_hz=1.2)
    monkeypatch.setattr(check_module, "RATE_BLOCK_SAMPLES", 10**9)
    whole = reachgate.check(robot, path)
    monkeypatch.setattr(check_module, "RATE_BLOCK_SAMPLES", 101)
    blocks = reachgate.check(robot, path)
    assert whole.violations and blocks.violations == whole.violations
    assert blocks.margins == whole.margins
    assert blocks.slowdown == whole.slowdown


def test_arm_manipulability_in_blocks_equals_one_jacobian_pass(robot, monkeypatch):
    from reachgate.kinematics import chain as kinematics

    rng = np.random.default_rng(41)
    q = rng.uniform(robot.lower, robot.upper, (1000, robot.n_axes))
    whole = kinematics.manipulability(kinematics.jacobian(robot, q)[:, :, 1:])
    monkeypatch.setattr(kinematics, "MANIPULABILITY_BLOCK_SAMPLES", 97)
    np.testing.assert_array_equal(kinematics.arm_manipulability(robot, q), whole)


def test_lag_rows_are_the_delayed_position_error_in_the_cell_whatever_the_placement(robot):
    """Analytic: the lag error |p(t) - p(t - lag)| is a distance between two TCP positions, so
    a rigid placement of the scenario leaves it unchanged; it is checked here against the
    error computed from the placed cell positions by hand (np.interp on each cell axis)."""
    path = reachgate.load_trajectory(DEMO_CASES / "approach_gusty.csv")
    placement = reachgate.Placement(xyz_m=(0.3, -0.2, 0.1), rpy_rad=(0.05, -0.1, 0.8))
    settings = reachgate.CheckSettings(placement=placement, lag_s=0.02, lag_tol_m=0.004)
    report = reachgate.check(robot, path, settings)
    T = placement.cell_T_scenario()
    cell_p = path.scenario_p_m @ T[:3, :3].T + T[:3, 3]
    t = path.t_s
    delayed = np.column_stack([np.interp(t - 0.02, t, cell_p[:, k]) for k in range(3)])
    error_m = np.linalg.norm(cell_p - delayed, axis=1)
    lag = [v for v in report.violations if v.check is reachgate.Check.LAG and v.axis == "tcp"]
    over = error_m > 0.004
    assert over.any() and lag  # the case is not empty
    worst = [v for v in lag if v.severity is reachgate.Severity.VIOLATION]
    assert max(v.worst for v in worst) == pytest.approx(error_m.max(), rel=1e-12)
    assert min(v.start_s for v in worst) == pytest.approx(t[over][0])
