"""Rest at the ends (DESIGN §11, --ends rest|free): the arm is held still before the first
sample and after the last, so an abrupt start or stop gives accel and jerk rows there."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

import reachgate
from reachgate.checking.derivatives import time_derivatives
from reachgate.cli import app
from reachgate.kinematics.chain import forward
from reachgate.model.transforms import matrix_to_quat
from reachgate.motion import disturb

from conftest import DEMO_CASES, DEMO_ROBOT

RATE_HZ = 250.0
STEP_S = 1.0 / RATE_HZ


@pytest.fixture(scope="module")
def robot():
    return reachgate.load_robot(DEMO_ROBOT)


def constant_speed_path(robot, speeds_rad_s: dict[int, float], duration_s: float = 0.4):
    """Arm at home, the given arm joints (0-based) turning at constant speeds from the first
    sample to the last, even 250 Hz steps; the TCP poses by forward kinematics."""
    t = np.arange(round(duration_s * RATE_HZ) + 1) * STEP_S
    q = np.tile(robot.home, (t.size, 1))
    for joint, speed in speeds_rad_s.items():
        q[:, 1 + joint] += speed * t
    cell_T_tool = forward(robot, q)
    return reachgate.Trajectory.from_arrays(
        t, cell_T_tool[:, :3, 3], matrix_to_quat(cell_T_tool[:, :3, :3]), name="constant"
    )


def test_constant_speed_start_gives_an_accel_row_at_the_first_sample_iff_v_over_dt_exceeds_amax(
    robot,
):
    """Analytic: held still before t0 and moving at v from t0, the sampled acceleration at
    the first sample is the second difference (x1 - 2 x0 + x_-1)/dt² = v/dt (x_-1 = x0), and
    at the last sample, stopping, the same. j1 turns at 1.05 amax·dt (v/dt just above amax),
    j4 at 0.95 amax·dt (just below: a near row at most, never a violation)."""
    j1, j4 = robot.joints[0], robot.joints[3]
    speeds = {0: 1.05 * j1.amax_per_s2 * STEP_S, 3: 0.95 * j4.amax_per_s2 * STEP_S}
    path = constant_speed_path(robot, speeds)
    report = reachgate.check(robot, path)  # default: --ends rest
    accel = {
        (v.axis, v.severity.value): v for v in report.violations if v.check is reachgate.Check.ACCEL
    }
    first, last = path.t_s[0], path.t_s[-1]
    starts = [
        v
        for v in report.violations
        if v.check is reachgate.Check.ACCEL and v.severity.value == "violation"
    ]
    assert {(v.axis, v.start_s) for v in starts} == {("j1", first), ("j1", last)}
    for v in starts:
        assert v.start_s == v.end_s == v.worst_s
        assert v.worst == pytest.approx(speeds[0] / STEP_S, rel=1e-6)
    assert ("j4", "violation") not in accel
    assert ("j4", "near") in accel  # 0.95 amax is inside the 10 % band
    assert accel["j4", "near"].worst == pytest.approx(speeds[3] / STEP_S, rel=1e-6)
    # an abrupt start is a jerk too (v/dt² here), on both moving joints
    jerk_axes = {v.axis for v in report.violations if v.check is reachgate.Check.JERK}
    assert jerk_axes == {"j1", "j4"}
    assert report.settings.ends is reachgate.Ends.REST


def test_free_ends_judge_the_same_path_as_a_window_of_a_longer_run(robot):
    speeds = {0: 1.05 * robot.joints[0].amax_per_s2 * STEP_S, 3: 0.5}
    path = constant_speed_path(robot, speeds)
    report = reachgate.check(robot, path, reachgate.CheckSettings(ends=reachgate.Ends.FREE))
    assert report.passed and report.violations == ()


def test_a_path_that_starts_and_ends_at_rest_gets_no_end_rows(robot):
    """A septic smoothstep move (zero speed, accel and jerk at both ends, analytic) of j1 by
    0.3 rad over 2 s: its peak accel 7.5·0.3/4·... is far below the limits; rest ends add
    nothing."""
    t = np.arange(501) * STEP_S * 2
    u = t / t[-1]
    q = np.tile(robot.home, (t.size, 1))
    q[:, 1] += 0.3 * u**4 * (35 - 84 * u + 70 * u**2 - 20 * u**3)
    cell_T_tool = forward(robot, q)
    path = reachgate.Trajectory.from_arrays(
        t, cell_T_tool[:, :3, 3], matrix_to_quat(cell_T_tool[:, :3, :3]), name="smooth"
    )
    rest = reachgate.check(robot, path)
    free = reachgate.check(robot, path, reachgate.CheckSettings(ends=reachgate.Ends.FREE))
    assert rest.passed and free.passed
    for axis in rest.margins:
        for kind in ("accel", "jerk"):
            if kind in rest.margins[axis]:
                assert rest.margins[axis][kind] == pytest.approx(free.margins[axis][kind], abs=0.02)


def test_every_perturb_case_ends_on_the_nominal_motion():
    """Our model (motion/disturb.py): a case is the nominal plus fade_in_out(t) times the
    response, and the septic fade is flat to third order at both ends, so at the last sample
    a case moves as its nominal does."""
    nominal = reachgate.load_trajectory(DEMO_CASES / "approach_calm.csv")
    (case,) = disturb.make_disturbance_cases(nominal, 1, 73, intensity="severe")
    offset = case.trajectory.scenario_p_m - nominal.scenario_p_m
    d = time_derivatives(nominal.t_s, offset)
    middle = (nominal.t_s > 5) & (nominal.t_s < nominal.t_s[-1] - 5)
    for name in ("velocity", "acceleration"):
        values = getattr(d, name)
        scale = np.abs(values[middle]).max(axis=0)
        assert np.all(np.abs(values[-1]) < 1e-3 * scale), name
        assert np.all(np.abs(values[0]) < 1e-3 * scale), name
    assert np.abs(offset[-1]).max() == 0.0


def test_ends_is_an_option_of_check_and_scan_and_is_recorded_in_the_json(tmp_path):
    runner = CliRunner()
    calm = str(DEMO_CASES / "approach_calm.csv")
    for ends in ("rest", "free"):
        result = runner.invoke(
            app,
            [
                "check",
                str(DEMO_ROBOT),
                calm,
                "--rail",
                "follow",
                "--format",
                "json",
                "--ends",
                ends,
            ],
        )
        assert result.exit_code == 0, result.output
        assert json.loads(result.stdout)["settings"]["ends"] == ends
    bad = runner.invoke(app, ["check", str(DEMO_ROBOT), calm, "--ends", "loose"])
    assert bad.exit_code == 2
    store = tmp_path / "s.sqlite"
    scan = runner.invoke(
        app,
        ["scan", str(DEMO_ROBOT), calm, "--rail", "follow", "--ends", "free", "--store", str(store),
         "--workers", "1", "--quiet"],
    )  # fmt: skip
    assert scan.exit_code == 0, scan.output
    import sqlite3

    with sqlite3.connect(store) as db:
        (settings,) = db.execute("select settings_json from cases").fetchone()
    assert json.loads(settings)["ends"] == "free"
