"""Numeric path IK: fast rotations wind no joint by a whole turn between coarse samples; the
sequential pass's one-sample iteration is the batched one."""

from __future__ import annotations

import numpy as np

import reachgate
from reachgate.kinematics.chain import forward
from reachgate.kinematics.numeric import MAX_ITERATIONS_SEQUENTIAL, _refine_single, refine
from reachgate.kinematics.path_ik import chain_targets
from reachgate.model.transforms import matrix_to_quat, rpy_to_matrix

from conftest import REPO, offset_wrist_arm


def test_fast_roll_on_the_gantry_follows_without_winding():
    """170° roll at 0.1 Hz, 96 samples per period: the last joint swings 340°, not 340° + 360°.

    Analytic: at home the TCP x axis lies on the last wrist joint, so a roll of amplitude A
    turns that joint by ±A and nothing else moves.
    """
    robot = reachgate.load_robot(REPO / "robots" / "demo_gantry.toml")
    home = forward(robot, robot.home[None])[0]
    t = np.linspace(0.0, 30.0, 288)
    roll = np.radians(170.0) * np.sin(2 * np.pi * 0.1 * t)
    R = home[:3, :3] @ rpy_to_matrix(np.column_stack([roll, 0 * t, 0 * t]))
    path = reachgate.Trajectory.from_arrays(t, np.tile(home[:3, 3], (t.size, 1)), matrix_to_quat(R))
    report = reachgate.check(robot, path)
    q = report.solution.q
    np.testing.assert_allclose(np.ptp(q[:, -1]), np.ptp(roll), atol=1e-6)
    np.testing.assert_allclose(np.ptp(q[:, :-1], axis=0), 0.0, atol=1e-6)
    assert report.solution.position_error_m.max() < 1e-9


def test_one_sample_iteration_equals_the_batched_one():
    """The sequential pass's one-sample damped least squares (small arrays) is the batched
    refine() step for step: the same solutions on a revolute and a prismatic-axis arm."""
    rng = np.random.default_rng(4417)
    for robot in (offset_wrist_arm(), reachgate.load_robot(REPO / "robots" / "demo_gantry.toml")):
        q_true = robot.home + rng.uniform(-0.3, 0.3, (20, robot.n_axes))
        q_true = np.clip(q_true, robot.lower, robot.upper)
        targets = chain_targets(robot, forward(robot, q_true), None)
        seeds = q_true + rng.uniform(-0.05, 0.05, q_true.shape)
        batch_q, _ = refine(robot.chain, targets, seeds, MAX_ITERATIONS_SEQUENTIAL)
        for k in range(len(seeds)):
            one_q, one_error = _refine_single(
                robot.chain, targets[k], seeds[k], MAX_ITERATIONS_SEQUENTIAL
            )
            assert np.linalg.norm(one_error) < 1e-12
            np.testing.assert_allclose(one_q, batch_q[k], atol=1e-12)


def test_a_solver_that_returns_nan_and_claims_success_cannot_make_a_pass(monkeypatch):
    """The forward-kinematics check of every solution is the safety net: joint values that
    are NaN (a solver gone astray) with zero reported error count as out of reach, so the
    verdict is fail, never pass."""
    import reachgate.kinematics.path_ik as ik_module
    from reachgate.kinematics.numeric import NumericSolution

    robot = offset_wrist_arm()
    t = np.linspace(0.0, 2.0, 201)
    q = robot.home + np.radians(5.0) * np.sin(2 * np.pi * 0.5 * t)[:, None]
    T = forward(robot, q)
    path = reachgate.Trajectory.from_arrays(t, T[:, :3, 3], matrix_to_quat(T[:, :3, :3]))
    window = reachgate.CheckSettings(ends=reachgate.Ends.FREE)  # a window of a longer sway
    assert reachgate.check(robot, path, window).verdict is reachgate.Verdict.PASS

    def astray(chain, targets, q_home):
        q_bad = np.tile(q_home, (targets.shape[0], 1))
        q_bad[50:60] = np.nan
        zeros = np.zeros(targets.shape[0])
        return NumericSolution(q_arm=q_bad, position_error_m=zeros, orientation_error_rad=zeros)

    monkeypatch.setattr(ik_module, "solve_path_numeric", astray)
    report = reachgate.check(robot, path, window)
    assert report.verdict is reachgate.Verdict.FAIL
    assert (report.solution.reach_excess_m[50:60] > 0).all()
    assert any(v.check is reachgate.Check.REACH for v in report.violations)


def test_seeds_between_solved_samples_are_exact_for_cubic_joint_motion():
    """Analytic: cubic Lagrange interpolation through two solved samples on each side gives a
    cubic exactly; where a side has one solved sample only, the seed is the linear one."""
    from reachgate.kinematics.numeric import _interpolated_seeds

    index = np.arange(40)
    q = np.column_stack([0.3 + 0.01 * index - 2e-4 * index**2 + 3e-6 * index**3, 0.5 * index])
    known = np.array([0, 3, 9, 14, 22, 31, 39])  # unevenly spread solved samples
    todo = np.setdiff1d(index, known)
    right = np.searchsorted(known, todo)
    seeds = _interpolated_seeds(q, known, right, todo)
    inner = (right >= 2) & (right + 1 <= known.size - 1)
    np.testing.assert_allclose(seeds[inner], q[todo[inner]], atol=1e-12)
    left, after = known[right[~inner] - 1], known[right[~inner]]
    w = ((todo[~inner] - left) / (after - left))[:, None]
    np.testing.assert_allclose(seeds[~inner], (1 - w) * q[left] + w * q[after], atol=1e-12)
