"""The `lag` check for orientation and with prediction (DESIGN §11), on analytic cases.

Sources (closed forms, derived here):
- a rotation about a fixed unit axis n by θ(t) = A·sin(ωt): R(t − τ)ᵀ·R(t) is the rotation
  about n by θ(t) − θ(t − τ) = 2A·sin(ωτ/2)·cos(ω(t − τ/2)), so its angle is the absolute value
  of that, and the rows lie where |cos(ω(t − τ/2))| > tol / (2A·sin(ωτ/2));
- x(t) = A·sin(ωt) extrapolated over τ from exact derivatives at t − τ misses by
  x(s + τ) − Σ_k τ^k x⁽ᵏ⁾(s)/k!, whose worst over s is, with θ = ωτ,
  none: 2A·|sin(θ/2)|; linear: A·√((1 − cos θ)² + (θ − sin θ)²);
  quadratic: A·√((cos θ − 1 + θ²/2)² + (sin θ − θ)²).
The rig's derivatives come from past samples only, so the reported worst must be within a
few percent of these, on even steps and with ±20 % jitter.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import reachgate
from reachgate import Check, Severity
from reachgate.checking.lag import Prediction, lag_errors, predicted_poses
from reachgate.kinematics.chain import forward
from reachgate.model.transforms import matrix_to_quat, quat_to_matrix

from conftest import DEMO_ROBOT

AXIS = np.array([1.0, 2.0, 2.0]) / 3.0


def _times(step_s, duration_s, jitter, seed):
    rng = np.random.default_rng(seed)
    steps = step_s * rng.uniform(1 - jitter, 1 + jitter, int(duration_s / step_s))
    return np.concatenate([[0.0], np.cumsum(steps)])


def _about_axis(angle_rad: np.ndarray) -> np.ndarray:
    half = 0.5 * angle_rad
    return np.column_stack([np.cos(half), np.sin(half)[:, None] * AXIS])


def worst_residual(prediction: Prediction, amplitude: float, theta: float) -> float:
    """The closed forms of the module docstring (exact derivatives)."""
    if prediction is Prediction.NONE:
        return 2 * amplitude * abs(math.sin(theta / 2))
    if prediction is Prediction.LINEAR:
        return amplitude * math.hypot(1 - math.cos(theta), theta - math.sin(theta))
    return amplitude * math.hypot(math.cos(theta) - 1 + theta**2 / 2, math.sin(theta) - theta)


@pytest.mark.parametrize("prediction", list(Prediction), ids=lambda p: p.value)
@pytest.mark.parametrize("jitter", [0.0, 0.2], ids=["even", "jitter20"])
def test_prediction_residual_of_a_sinusoid_matches_the_closed_form(prediction, jitter):
    """Position x = A sin(ωt) and a rotation by A' sin(ωt) about a fixed axis: the worst error
    left after prediction over τ = 40 ms at 1.5 Hz, sampled at 250 Hz, within 3 % of the closed
    form for exact derivatives (past samples only; rotations extrapolated on the group, where
    a fixed axis makes the closed form the same as for a scalar)."""
    t = _times(0.004, 4.0, jitter, seed=2201 + int(jitter * 10))
    omega, tau, amplitude_m, amplitude_rad = 2 * math.pi * 1.5, 0.04, 0.2, 0.5
    p = np.zeros((t.size, 3))
    p[:, 0] = amplitude_m * np.sin(omega * t)
    q = _about_axis(amplitude_rad * np.sin(omega * t))
    errors = lag_errors(t, p, q, tau, prediction)
    settled = t > 1.0  # past the start, where the command is held still before t = 0
    theta = omega * tau
    expected_m = worst_residual(prediction, amplitude_m, theta)
    assert errors.position_m[settled].max() == pytest.approx(expected_m, rel=0.03)
    assert errors.angle_rad[settled].max() == pytest.approx(
        worst_residual(prediction, amplitude_rad, theta), rel=0.03
    )


def test_prediction_is_causal():
    """Changing the command from time c on leaves every predicted pose before c + τ − one step
    unchanged: the pose predicted for t uses samples up to t − τ (and the one after, for the
    interpolation when t − τ falls between two samples)."""
    step, tau, c = 0.004, 0.02, 1.0
    t = np.arange(0.0, 2.0, step)
    p = np.zeros((t.size, 3))
    p[:, 1] = 0.1 * np.sin(3.0 * t)
    q = _about_axis(0.2 * np.sin(2.0 * t))
    changed_p, changed_q = p.copy(), q.copy()
    cut = t >= c
    changed_p[cut, 1] += 0.05
    changed_q[cut] = _about_axis(0.2 * np.sin(2.0 * t[cut]) + 0.1)
    before = t < c + tau - step - 1e-9
    for prediction in list(Prediction):
        p_a, q_a = predicted_poses(t, p, q, tau, prediction)
        p_b, q_b = predicted_poses(t, changed_p, changed_q, tau, prediction)
        np.testing.assert_array_equal(p_a[before], p_b[before])
        np.testing.assert_array_equal(q_a[before], q_b[before])
        assert not np.array_equal(p_a, p_b) and not np.array_equal(q_a, q_b)


def _rotating_case(robot, t, amplitude_rad, omega):
    """The TCP held at the arm's home position, turning about AXIS (cell frame) by A cos(ωt)
    (starting at rest, so the hold before the first sample adds no error of its own)."""
    home_T = forward(robot, robot.home[None, :])[0]
    R = quat_to_matrix(_about_axis(amplitude_rad * np.cos(omega * t))) @ home_T[:3, :3]
    return reachgate.Trajectory.from_arrays(
        t, np.tile(home_T[:3, 3], (t.size, 1)), matrix_to_quat(R), name="turn"
    )


def test_orientation_lag_rows_lie_where_the_closed_form_angle_exceeds_the_tolerance():
    """Rotation by 8° cos(2π·0.5 t) about a fixed axis, lag 60 ms, --lag-tol-deg 0.8: the angle
    2A sin(ωτ/2)|sin(ω(t − τ/2))| (peak 1.51°) exceeds the tolerance in one interval per half
    period; rows of axis tcp-rotation start and end within one step of the analytic crossings
    and report the peak; no position rows (the TCP does not move)."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    step = 0.004
    t = np.arange(0.0, 4.0 + 1e-9, step)
    amplitude, omega, tau, tol = math.radians(8.0), math.pi, 0.06, math.radians(0.8)
    path = _rotating_case(robot, t, amplitude, omega)
    settings = reachgate.CheckSettings(lag_s=tau, lag_tol_rad=tol)
    report = reachgate.check(robot, path, settings)
    rows = sorted(
        (v for v in report.violations if v.check is Check.LAG and v.severity is Severity.VIOLATION),
        key=lambda v: v.start_s,
    )
    assert rows and all(v.axis == "tcp-rotation" and v.unit == "rad" for v in rows)
    peak = 2 * amplitude * math.sin(omega * tau / 2)
    half_width = math.acos(tol / peak) / omega  # |sin(ω(t − τ/2))| > tol / peak around each centre
    centres = [tau / 2 + (k + 0.5) * math.pi / omega for k in range(4)]
    assert len(rows) == len(centres)
    for row, centre in zip(rows, centres, strict=True):
        assert abs(row.start_s - (centre - half_width)) <= step + 1e-9
        assert abs(row.end_s - (centre + half_width)) <= step + 1e-9
        assert row.worst == pytest.approx(peak, rel=1e-3)
        assert row.limit == pytest.approx(tol)
    assert report.settings.as_dict()["lag_tol_rad"] == pytest.approx(tol)


def test_prediction_lowers_the_lag_rows_by_the_closed_form_ratio_and_is_recorded():
    """The same turning case with a tiny tolerance (every sample in a row): the check reports
    the worst of lag_errors; after the start-up of the predictor (its first samples see the
    command held still before t = 0), the worst angle left by linear prediction over the plain
    one is the ratio of the closed forms, √((1 − cos θ)² + (θ − sin θ)²) / (2 sin(θ/2)) ≈ θ/2
    ≈ 0.094 for θ = ωτ."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    t = np.arange(0.0, 4.0 + 1e-9, 0.004)
    omega, tau = math.pi, 0.06
    path = _rotating_case(robot, t, math.radians(8.0), omega)
    settled = {}
    for prediction in (Prediction.NONE, Prediction.LINEAR):
        settings = reachgate.CheckSettings(
            lag_s=tau, lag_tol_rad=math.radians(0.001), predict=prediction
        )
        report = reachgate.check(robot, path, settings)
        angle = lag_errors(t, path.scenario_p_m, path.scenario_q_wxyz, tau, prediction).angle_rad
        reported = max(v.worst for v in report.violations if v.axis == "tcp-rotation")
        assert reported == pytest.approx(angle.max(), rel=1e-12)
        assert report.settings.as_dict()["predict"] == prediction.value
        settled[prediction] = angle[t > 0.5].max()
    theta = omega * tau
    expected = worst_residual(Prediction.LINEAR, 1.0, theta) / worst_residual(
        Prediction.NONE, 1.0, theta
    )
    assert settled[Prediction.LINEAR] / settled[Prediction.NONE] == pytest.approx(
        expected, rel=0.01
    )


def test_bad_rotation_tolerance_is_refused():
    with pytest.raises(reachgate.ReachgateError, match="--lag-tol-deg"):
        reachgate.CheckSettings(lag_s=0.02, lag_tol_rad=0.0)


def test_check_command_takes_the_rotation_tolerance_and_the_prediction(tmp_path):
    """--lag-tol-deg and --predict reach the check (rows, limit, settings); bad values exit 2."""
    import json

    from typer.testing import CliRunner

    from reachgate.cli import app
    from reachgate.model.trajectory import write_trajectory

    robot = reachgate.load_robot(DEMO_ROBOT)
    t = np.arange(0.0, 2.0 + 1e-9, 0.004)
    case = tmp_path / "turn.csv"
    write_trajectory(case, _rotating_case(robot, t, math.radians(8.0), math.pi))
    runner = CliRunner()
    base = ["check", str(DEMO_ROBOT), str(case), "--lag", "0.06", "--format", "json"]
    worst = {}
    for predict in ("none", "quadratic"):
        result = runner.invoke(app, [*base, "--lag-tol-deg", "0.05", "--predict", predict])
        rows = [
            v
            for v in json.loads(result.output)["violations"]
            if v["check"] == "lag" and v["axis"] == "tcp-rotation"
        ]
        assert rows and rows[0]["limit"] == pytest.approx(math.radians(0.05))
        worst[predict] = max(v["worst"] for v in rows)
    assert worst["quadratic"] < 0.2 * worst["none"]
    for bad in (["--lag-tol-deg", "-1"], ["--predict", "cubic"]):
        result = runner.invoke(app, [*base, *bad])
        assert result.exit_code == 2, result.output
        assert bad[0] in result.output


def test_rotation_tolerance_and_prediction_without_lag_are_refused(tmp_path):
    """Options never ignored: --lag-tol-deg and --predict only mean something with --lag."""
    from typer.testing import CliRunner

    from reachgate.cli import app

    for extra in (["--lag-tol-deg", "0.5"], ["--predict", "linear"]):
        result = CliRunner().invoke(
            app,
            [
                "check",
                str(DEMO_ROBOT),
                str(DEMO_ROBOT.parents[1] / "trajectories" / "approach_calm.csv"),
                *extra,
            ],
        )
        assert result.exit_code == 2 and extra[0] in result.output and "--lag" in result.output
